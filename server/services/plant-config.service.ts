import { plantConfig, type ConfigChange, type PlantConfig, type PlantConfigInput } from '../../shared/contracts/plant-config.ts';
import { SETTINGS, type SettingKey } from '../../shared/contracts/settings.ts';
import { versionAt } from '../../shared/domain/geometry-versions.ts';
import type { Clock } from '../app-context.ts';
import type { Principal } from '../auth/principal.ts';
import { ConflictError, ForbiddenError, NotFoundError, ValidationError } from '../http/errors.ts';
import { zodFields } from '../http/validate.ts';
import type { BasinGeom, ClarifierGeom, PlantModelRepository, PlantModelTx, PumpGeom } from '../repositories/plant-model.repository.ts';
import { tagSettings } from '../repositories/wiring.repository.ts';
import { assertScope, plantOut } from './plant-model.service.ts';

/**
 * The plant configuration document (shared/contracts/plant-config.ts): export a plant as one
 * document, create a plant from one, and compare or apply a document to an existing plant.
 *
 * One path for all three: a document becomes a flat list of entries keyed by trade path
 * (`model.trains[t1].aerationBasins[ab1].history[2026-01-01T00:00:00.000Z]`); the difference
 * between the plant's entries and the document's is the change list `PUT …/config?dryRun=1`
 * answers, and applying those changes in one transaction is what PUT, POST /plants and the demo
 * plant at start-up do (a new plant starts from no entries).
 */

type Kind = 'plant' | 'train' | 'basin' | 'clarifier' | 'pump' | 'basinV' | 'clarifierV' | 'pumpV' | 'setting' | 'source' | 'tag' | 'mapping';

interface Entry {
  kind: Kind;
  path: string;
  /** Codes/names that locate the entry: train code, unit code, ISO time, source/tag name, … */
  key: string[];
  value: unknown;
}
interface Change extends ConfigChange {
  entry: Entry;
}

// Dependency order: adds and updates run forward, removals backward.
const ORDER: Kind[] = ['plant', 'train', 'basin', 'clarifier', 'pump', 'basinV', 'clarifierV', 'pumpV', 'setting', 'source', 'tag', 'mapping'];

const stable = (v: unknown): string =>
  JSON.stringify(v, (_k, x: unknown) => (x && typeof x === 'object' && !Array.isArray(x) ? Object.fromEntries(Object.entries(x as Record<string, unknown>).sort(([a], [b]) => a.localeCompare(b))) : x));

/** Geometry history of a unit in the document, with the current fields appended as a version from `now` when they differ from what the history gives then. */
function historyOf<G extends { inService: boolean }>(history: Array<G & { effectiveFrom: string }> | undefined, current: G, now: Date): Array<G & { effectiveFrom: string }> {
  const list = (history ?? []).map((v) => ({ ...v, effectiveFrom: new Date(v.effectiveFrom).toISOString() }));
  const held = versionAt(list.map((v) => ({ ...v, effectiveFrom: new Date(v.effectiveFrom) })), now);
  if (held) {
    const { effectiveFrom: _f, ...g } = held;
    if (stable(g) === stable(current)) return list;
  }
  return [...list.filter((v) => v.effectiveFrom !== now.toISOString()), { ...current, effectiveFrom: now.toISOString() }];
}

/** The entries a (parsed) document describes. */
export function documentEntries(doc: PlantConfig, now: Date): Entry[] {
  const out: Entry[] = [];
  for (const f of ['code', 'name', 'timezone', 'peakFlow_m3h', 'unitSystem'] as const) out.push({ kind: 'plant', path: `plant.${f}`, key: [f], value: doc.plant[f] });
  for (const t of doc.model.trains) {
    const tp = `model.trains[${t.code}]`;
    out.push({ kind: 'train', path: tp, key: [t.code], value: { name: t.name } });
    for (const b of t.aerationBasins) {
      const p = `${tp}.aerationBasins[${b.code}]`;
      out.push({ kind: 'basin', path: p, key: [t.code, b.code], value: { name: b.name } });
      const cur: BasinGeom = { volume_m3: b.volume_m3, aeratedFraction: b.aeratedFraction, sideWaterDepth_m: b.sideWaterDepth_m, inService: b.inService };
      for (const v of historyOf(b.history, cur, now)) {
        const { effectiveFrom, ...g } = v;
        out.push({ kind: 'basinV', path: `${p}.history[${effectiveFrom}]`, key: [t.code, b.code, effectiveFrom], value: g });
      }
    }
    for (const c of t.secondaryClarifiers) {
      const p = `${tp}.secondaryClarifiers[${c.code}]`;
      out.push({ kind: 'clarifier', path: p, key: [t.code, c.code], value: { name: c.name } });
      const cur: ClarifierGeom = { area_m2: c.area_m2, sideWaterDepth_m: c.sideWaterDepth_m, feedDepth_m: c.feedDepth_m, count: c.count, inService: c.inService };
      for (const v of historyOf(c.history, cur, now)) {
        const { effectiveFrom, ...g } = v;
        out.push({ kind: 'clarifierV', path: `${p}.history[${effectiveFrom}]`, key: [t.code, c.code, effectiveFrom], value: g });
      }
    }
    for (const x of t.pumps) {
      const p = `${tp}.pumps[${x.code}]`;
      out.push({ kind: 'pump', path: p, key: [t.code, x.code], value: { name: x.name, kind: x.kind, servesClarifier: x.servesClarifier } });
      const cur: PumpGeom = { capacity_m3h: x.capacity_m3h, inService: x.inService };
      for (const v of historyOf(x.history, cur, now)) {
        const { effectiveFrom, ...g } = v;
        out.push({ kind: 'pumpV', path: `${p}.history[${effectiveFrom}]`, key: [t.code, x.code, effectiveFrom], value: g });
      }
    }
  }
  for (const [k, v] of Object.entries(doc.settings)) out.push({ kind: 'setting', path: `settings[${k}]`, key: [k], value: v });
  for (const s of doc.sources) {
    // The password stands for "a secret is needed"; it is never compared (a document has no secrets to set).
    const { name, password, ...rest } = s;
    out.push({ kind: 'source', path: `sources[${name}]`, key: [name], value: { ...rest, secretRequired: password !== null } });
  }
  for (const t of doc.tags) {
    const { name, ...rest } = t;
    out.push({ kind: 'tag', path: `tags[${name}]`, key: [name], value: rest });
  }
  for (const m of doc.signalMap) {
    const target = `${m.target.type}:${m.target.code ?? ''}`;
    out.push({ kind: 'mapping', path: `signalMap[${m.signal}@${target}]`, key: [m.signal, m.target.type, m.target.code ?? ''], value: { tag: m.tag } });
  }
  return out;
}

/** add / update / remove between two entry lists, in the order they can be applied. */
export function diffEntries(current: Entry[], wanted: Entry[]): Change[] {
  const cur = new Map(current.map((e) => [e.path, e]));
  const want = new Map(wanted.map((e) => [e.path, e]));
  const changes: Change[] = [];
  for (const e of wanted) {
    const c = cur.get(e.path);
    if (!c) changes.push({ op: 'add', path: e.path, after: e.value, entry: e });
    else if (stable(c.value) !== stable(e.value)) changes.push({ op: 'update', path: e.path, before: c.value, after: e.value, entry: e });
  }
  for (const e of current) if (!want.has(e.path)) changes.push({ op: 'remove', path: e.path, before: e.value, entry: e });
  const rank = (c: Change) => (c.op === 'remove' ? -ORDER.length + (ORDER.length - 1 - ORDER.indexOf(c.entry.kind)) : ORDER.indexOf(c.entry.kind));
  return changes.sort((a, b) => rank(a) - rank(b));
}

const publicChange = ({ entry: _e, ...c }: Change): ConfigChange => c;

export interface PlantConfigServiceDeps {
  modelRepo: PlantModelRepository;
  clock: Clock;
}

/** Export, create from, compare with and apply configuration documents. */
export function createPlantConfigService({ modelRepo: repo, clock }: PlantConfigServiceDeps) {
  const now = () => new Date(clock());

  /** The document of a plant as stored (through `r`, so it can run inside a transaction). */
  async function exportFrom(r: PlantModelTx, plantId: number, at: Date): Promise<PlantConfig | undefined> {
    const plant = await r.plant(plantId);
    if (!plant) return undefined;
    const [m, settingRows, sourceRows, tagRows, maps] = [await r.model(plantId), await r.plantSettings(plantId), await r.sources(plantId), await r.tags(plantId), await r.mappings(plantId)];
    const iso = (d: Date) => d.toISOString();
    const held = <G extends { effectiveFrom: Date }>(vs: G[]) => versionAt(vs, at);
    const codeOf = new Map<string, string>();
    for (const t of m.trains) codeOf.set(`train:${t.id}`, t.code);
    for (const b of m.basins) codeOf.set(`basin:${b.id}`, b.code);
    for (const c of m.clarifiers) codeOf.set(`clarifier:${c.id}`, c.code);
    for (const x of m.pumps) codeOf.set(`pump:${x.id}`, x.code);
    const sourceName = new Map(sourceRows.map((s) => [s.id, s.name]));
    const tagName = new Map(tagRows.map((t) => [t.id, t.name]));
    const doc = {
      formatVersion: 1 as const,
      plant: { code: plant.code, name: plant.name, timezone: plant.timezone, peakFlow_m3h: plant.peakFlow_m3h, unitSystem: plant.unitSystem },
      model: {
        trains: m.trains.map((t) => ({
          code: t.code,
          name: t.name,
          aerationBasins: m.basins
            .filter((b) => b.trainId === t.id && b.versions.length)
            .map((b) => {
              const v = held(b.versions)!;
              return { code: b.code, name: b.name, volume_m3: v.volume_m3, aeratedFraction: v.aeratedFraction, sideWaterDepth_m: v.sideWaterDepth_m, inService: v.inService, history: b.versions.map((h) => ({ ...h, effectiveFrom: iso(h.effectiveFrom) })) };
            }),
          secondaryClarifiers: m.clarifiers
            .filter((c) => c.trainId === t.id && c.versions.length)
            .map((c) => {
              const v = held(c.versions)!;
              return { code: c.code, name: c.name, area_m2: v.area_m2, sideWaterDepth_m: v.sideWaterDepth_m, feedDepth_m: v.feedDepth_m, count: v.count, inService: v.inService, history: c.versions.map((h) => ({ ...h, effectiveFrom: iso(h.effectiveFrom) })) };
            }),
          pumps: m.pumps
            .filter((x) => x.trainId === t.id && x.versions.length)
            .map((x) => {
              const v = held(x.versions)!;
              return { code: x.code, name: x.name, kind: x.kind, capacity_m3h: v.capacity_m3h, servesClarifier: x.clarifierId === null ? null : (codeOf.get(`clarifier:${x.clarifierId}`) ?? null), inService: v.inService, history: x.versions.map((h) => ({ ...h, effectiveFrom: iso(h.effectiveFrom) })) };
            }),
        })),
      },
      // Only overrides that still pass their schema (a stale row is ignored by the engine too).
      settings: Object.fromEntries(settingRows.filter((s) => s.key in SETTINGS && SETTINGS[s.key as SettingKey].schema.safeParse(s.value).success).map((s) => [s.key, s.value])),
      sources: sourceRows.map((s) => ({ kind: s.kind, name: s.name, url: s.url, username: s.username, password: s.secret ? { secretRequired: true as const } : null, options: s.options as Record<string, unknown>, enabled: s.enabled })),
      tags: tagRows.map((t) => ({
        name: t.name,
        source: sourceName.get(t.sourceId)!,
        ...tagSettings(t),
      })),
      signalMap: maps.flatMap((mp): PlantConfig['signalMap'] => {
        const signal = mp.signal as PlantConfig['signalMap'][number]['signal'];
        if (mp.targetType === 'plant') return mp.targetId === plantId ? [{ signal, target: { type: 'plant' as const, code: null }, tag: tagName.get(mp.tagId)! }] : [];
        // A mapping whose unit is gone (target ids carry no foreign key) is not part of the plant.
        const code = codeOf.get(`${mp.targetType}:${mp.targetId}`);
        return code === undefined ? [] : [{ signal, target: { type: mp.targetType, code }, tag: tagName.get(mp.tagId)! }];
      }),
    };
    // The stored plant passes its own schema (a document that cannot be posted back is a bug).
    return plantConfig.parse(doc);
  }

  /** Applies changes through `r` (inside the caller's transaction), resolving codes to ids as it goes. */
  async function apply(r: PlantModelTx, p: Principal | null, plantId: number, changes: Change[]): Promise<void> {
    let m = await r.model(plantId);
    const reload = async () => (m = await r.model(plantId));
    const train = (code: string) => m.trains.find((t) => t.code === code)!;
    const unit = (kind: 'basin' | 'clarifier' | 'pump', code: string) => (kind === 'basin' ? m.basins : kind === 'clarifier' ? m.clarifiers : m.pumps).find((u) => u.code === code);
    let sources = await r.sources(plantId);
    let tags = await r.tags(plantId);
    const maps = await r.mappings(plantId);
    let lastKind: Kind | null = null;
    for (const c of changes) {
      const e = c.entry;
      // Codes added by an earlier step are needed by the next kind: reload when the kind changes.
      if (lastKind !== e.kind) {
        await reload();
        sources = await r.sources(plantId);
        tags = await r.tags(plantId);
        lastKind = e.kind;
      }
      const v = (c.op === 'remove' ? c.before : c.after) as Record<string, unknown>;
      switch (e.kind) {
        case 'plant':
          await r.updatePlant(plantId, { [e.key[0]!]: c.after });
          break;
        case 'train':
          if (c.op === 'add') await r.insertTrain(plantId, e.key[0]!, v.name as string);
          else if (c.op === 'update') await r.updateTrain(train(e.key[0]!).id, { name: v.name as string });
          else {
            for (const k of ['basin', 'clarifier', 'pump'] as const) for (const u of (k === 'basin' ? m.basins : k === 'clarifier' ? m.clarifiers : m.pumps).filter((x) => x.trainId === train(e.key[0]!).id)) await r.deleteUnit(k, u.id);
            await r.deleteMappingsOf('train', train(e.key[0]!).id);
            await r.deleteTrain(train(e.key[0]!).id);
          }
          break;
        case 'basin':
        case 'clarifier':
        case 'pump': {
          const [tc, uc] = e.key as [string, string];
          const u = unit(e.kind, uc);
          if (c.op === 'remove') {
            if (u) await r.deleteUnit(e.kind, u.id);
          } else if (e.kind === 'pump') {
            const serves = v.servesClarifier as string | null;
            const clarifierId = serves === null ? null : (unit('clarifier', serves)?.id ?? null);
            if (c.op === 'add') await r.insertPump({ trainId: train(tc).id, code: uc, name: v.name as string, kind: v.kind as 'ras' | 'was', clarifierId });
            else await r.updatePump(u!.id, { name: v.name as string, kind: v.kind as 'ras' | 'was', clarifierId });
          } else if (c.op === 'add') {
            if (e.kind === 'basin') await r.insertBasin({ trainId: train(tc).id, code: uc, name: v.name as string });
            else await r.insertClarifier({ trainId: train(tc).id, code: uc, name: v.name as string });
          } else if (e.kind === 'basin') await r.updateBasin(u!.id, { name: v.name as string });
          else await r.updateClarifier(u!.id, { name: v.name as string });
          break;
        }
        case 'basinV':
        case 'clarifierV':
        case 'pumpV': {
          const kind = e.kind === 'basinV' ? 'basin' : e.kind === 'clarifierV' ? 'clarifier' : 'pump';
          const u = unit(kind, e.key[1]!);
          const effectiveFrom = new Date(e.key[2]!);
          if (!u) break; // removed with its unit
          if (c.op === 'remove') await r.deleteVersion(kind, u.id, effectiveFrom);
          else if (kind === 'basin') await r.putBasinVersion(u.id, { ...(v as unknown as BasinGeom), effectiveFrom });
          else if (kind === 'clarifier') await r.putClarifierVersion(u.id, { ...(v as unknown as ClarifierGeom), effectiveFrom });
          else await r.putPumpVersion(u.id, { ...(v as unknown as PumpGeom), effectiveFrom });
          break;
        }
        case 'setting':
          if (c.op === 'remove') await r.deleteSetting(plantId, e.key[0]!);
          else await r.putSetting(plantId, e.key[0]!, c.after, p?.userId ?? null);
          break;
        case 'source': {
          const s = sources.find((x) => x.name === e.key[0]);
          const { secretRequired, ...row } = v as { secretRequired: boolean; kind: 'mqtt' | 'opcua'; url: string; username: string | null; options: Record<string, unknown>; enabled: boolean };
          if (c.op === 'remove') await r.deleteSource(s!.id);
          // A source that needs a secret starts disabled: the document carries none, so it could not connect yet.
          else if (c.op === 'add') await r.insertSource({ plantId, name: e.key[0]!, ...row, enabled: row.enabled && !secretRequired });
          else await r.updateSource(s!.id, { ...row, enabled: row.enabled && (!secretRequired || s!.secret !== null) });
          break;
        }
        case 'tag': {
          const t = tags.find((x) => x.name === e.key[0]);
          if (c.op === 'remove') {
            await r.deleteTag(t!.id);
            break;
          }
          const { source, ...row } = v as { source: string } & Record<string, unknown>;
          const sourceId = sources.find((s) => s.name === source)!.id;
          if (c.op === 'add') await r.insertTag({ ...(row as object), plantId, sourceId, name: e.key[0]! } as Parameters<PlantModelTx['insertTag']>[0]);
          else await r.updateTag(t!.id, { ...(row as object), sourceId });
          break;
        }
        case 'mapping': {
          const [signal, type, code] = e.key as [string, 'plant' | 'train' | 'basin' | 'clarifier' | 'pump', string];
          const targetId = type === 'plant' ? plantId : type === 'train' ? train(code).id : unit(type, code)!.id;
          if (c.op === 'remove') {
            const row = maps.find((x) => x.signal === signal && x.targetType === type && x.targetId === targetId);
            if (row) await r.deleteMapping(row.id);
          } else await r.putMapping({ plantId, signal, targetType: type, targetId, tagId: tags.find((t) => t.name === (v.tag as string))!.id });
          break;
        }
      }
    }
  }

  /** Document validation errors as one 422 with dotted field paths. */
  function parse(input: PlantConfigInput | unknown): PlantConfig {
    const r = plantConfig.safeParse(input);
    if (!r.success) throw new ValidationError(zodFields(r.error), 'the configuration document is invalid');
    return r.data;
  }

  async function createIn(r: PlantModelTx, p: Principal | null, doc: PlantConfig) {
    if (await r.plantByCode(doc.plant.code)) throw new ConflictError(`a plant with code "${doc.plant.code}" exists`);
    const row = await r.insertPlant({ code: doc.plant.code, name: doc.plant.name, timezone: doc.plant.timezone, peakFlow_m3h: doc.plant.peakFlow_m3h, unitSystem: doc.plant.unitSystem });
    const t = now();
    const changes = diffEntries(documentEntries({ ...doc, model: { trains: [] }, settings: {}, sources: [], tags: [], signalMap: [] }, t), documentEntries(doc, t));
    await apply(r, p, row.id, changes);
    await r.audit(p, 'plant.create_from_config', `plant:${row.id}`, { code: doc.plant.code, changes: changes.length, sourcesAwaitingSecret: doc.sources.filter((s) => s.password).map((s) => s.name) });
    return row;
  }

  return {
    parse,

    async export(p: Principal, plantId: number): Promise<PlantConfig> {
      assertScope(p, plantId);
      const doc = await exportFrom(repo, plantId, now());
      if (!doc) throw new NotFoundError(`no plant ${plantId}`);
      return doc;
    },

    /** A new plant from a document (ids in it are ignored; code and name may be overridden). */
    async create(p: Principal | null, input: PlantConfig, override: { code?: string; name?: string } = {}) {
      if (p?.plantIds) throw new ForbiddenError('a plant-scoped token cannot create plants');
      const doc = parse({ ...input, plant: { ...input.plant, ...(override.code ? { code: override.code } : {}), ...(override.name ? { name: override.name } : {}) } });
      const row = await repo.transaction((r) => createIn(r, p, doc));
      return plantOut(row);
    },

    /**
     * The demo plant at start-up goes through the same path as POST /plants; an existing plant
     * with the code is left alone (an integrator may have changed it).
     */
    async ensure(p: Principal | null, input: PlantConfigInput): Promise<{ plantId: number; created: boolean }> {
      const doc = parse(input);
      const existing = await repo.plantByCode(doc.plant.code);
      if (existing) return { plantId: existing.id, created: false };
      const row = await repo.transaction((r) => createIn(r, p, doc));
      return { plantId: row.id, created: true };
    },

    /** The changes a document makes to a plant; applied in one transaction unless `dryRun`. */
    async put(p: Principal, plantId: number, input: PlantConfig, dryRun: boolean): Promise<{ plantId: number; applied: boolean; changes: ConfigChange[] }> {
      assertScope(p, plantId);
      const doc = parse(input);
      return repo.transaction(async (r) => {
        const t = now();
        const current = await exportFrom(r, plantId, t);
        if (!current) throw new NotFoundError(`no plant ${plantId}`);
        if (doc.plant.code !== current.plant.code) {
          const other = await r.plantByCode(doc.plant.code);
          if (other && other.id !== plantId) throw new ConflictError(`a plant with code "${doc.plant.code}" exists`);
        }
        const changes = diffEntries(documentEntries(current, t), documentEntries(doc, t));
        if (!dryRun && changes.length) {
          await apply(r, p, plantId, changes);
          await r.audit(p, 'plant.config_apply', `plant:${plantId}`, { changes: changes.map(({ op, path }) => ({ op, path })) });
        }
        return { plantId, applied: !dryRun, changes: changes.map(publicChange) };
      });
    },

    /** Points named sources of a plant at new URLs (the demo's embedded broker and simulator ports change per run). */
    async setSourceUrls(p: Principal | null, plantId: number, urls: Record<string, string>): Promise<void> {
      await repo.transaction(async (r) => {
        for (const s of await r.sources(plantId)) {
          const url = urls[s.name];
          if (url && url !== s.url) {
            await r.updateSource(s.id, { url });
            await r.audit(p, 'source.update', `source:${s.id}`, { url });
          }
        }
      });
    },
  };
}
export type PlantConfigService = ReturnType<typeof createPlantConfigService>;
