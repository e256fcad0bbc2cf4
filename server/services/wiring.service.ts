import { testMqttConnection } from '../../ingest/mqtt/mqtt-connection.ts';
import { SIGNAL_KINDS } from '../../shared/contracts/plant-layout.ts';
import {
  signalTargetType,
  sourceOptionsSchema,
  sourceUrlIssue,
  tagAddressIssue,
  TAG_CSV_COLUMNS,
  TAG_CSV_MAX_ROWS,
  TAG_CSV_REQUIRED,
  tagCreate,
  type ConnectionTestOut,
  type MappingOut,
  type MappingPut,
  type SourceCreate,
  type SourceKind,
  type SourceOut,
  type SourcePatch,
  type TagConfigOut,
  type TagCreate,
  type TagImportOut,
  type TagImportRow,
  type TagPatch,
} from '../../shared/contracts/wiring.ts';
import type { Logger } from 'pino';
import type { Principal } from '../auth/principal.ts';
import { ConflictError, NotFoundError, UnsupportedMediaTypeError, ValidationError } from '../http/errors.ts';
import { zodFields } from '../http/validate.ts';
import { tagSettings, uniqueViolation, type MappingRow, type NewTagRow, type SourceRow, type TagRow, type TargetRow, type WiringRepository } from '../repositories/wiring.repository.ts';
import type { Actor, AuditLog } from './audit.service.ts';
import { csvHeaderProblem, parseCsvUpload } from './csv.service.ts';
import type { OpcuaBrowseService } from './opcua-browse.service.ts';
import { assertPlantScope, type PlantAccess } from './plant.service.ts';
import type { IngestRepository } from '../repositories/ingest.repository.ts';

/** MQTT "test connection" budget: CONNECT → CONNACK within this [ms]. */
export const MQTT_TEST_TIMEOUT_MS = 5_000;

/** The answer for a source: the password is never part of it, only whether one is stored. */
export function sourceOut(s: SourceRow, tagCount: number): SourceOut {
  return {
    id: s.id,
    plantId: s.plantId,
    name: s.name,
    kind: s.kind,
    url: s.url,
    username: s.username,
    hasSecret: s.secret !== null && s.secret !== '',
    options: (s.options ?? {}) as Record<string, unknown>,
    enabled: s.enabled,
    tags: tagCount,
    createdAt: s.createdAt.toISOString(),
  };
}

function conflictMessage(constraint: string, what: { name?: string; address?: string }): string {
  if (constraint === 'sources_plant_name_uq') return `the plant already has a source named "${what.name}"`;
  if (constraint === 'tags_plant_name_uq') return `the plant already has a tag named "${what.name}"`;
  if (constraint === 'tags_source_address_uq') return `the source already has a tag at address "${what.address}"`;
  return 'that would duplicate an existing entry';
}

/** Runs a write, turning a unique-index violation into a 409 that names what is duplicated. */
async function unique<T>(what: { name?: string; address?: string }, fn: () => Promise<T>): Promise<T> {
  try {
    return await fn();
  } catch (err) {
    const c = uniqueViolation(err);
    if (c !== null) throw new ConflictError(conflictMessage(c, what));
    throw err;
  }
}

/** A CSV cell as a number when it reads as one in plain decimal notation (else the text, refused with the column's name). */
function csvNumber(t: string): unknown {
  return /^[+-]?(\d+\.?\d*|\.\d+)$/.test(t) ? Number(t) : t;
}
/** JSON field of the tag form → CSV column, so import errors name the column the user sees. */
const CSV_COLUMN_OF: Record<string, string> = {
  name: 'name',
  sourceId: 'source',
  address: 'address',
  unit: 'unit',
  description: 'description',
  scaleGain: 'scale_gain',
  scaleOffset: 'scale_offset',
  deadband: 'deadband',
  expectedPeriod_s: 'expected_period_s',
  rangeLow: 'range_low',
  rangeHigh: 'range_high',
};

/** MQTT "test connection": connects as ingest does (ingest/mqtt/mqtt-connection.ts), with a session of its own. */
export function testMqtt(s: Pick<SourceRow, 'id' | 'url' | 'username' | 'secret' | 'options'>, timeoutMs = MQTT_TEST_TIMEOUT_MS): Promise<ConnectionTestOut> {
  return testMqttConnection(s, timeoutMs);
}

/**
 * Sources, tags and the signal map of a plant (integrator and up), with every write audited.
 * Passwords go in and never out (answers say `hasSecret`), nor into the audit log.
 */
export interface WiringServiceDeps {
  wiringRepo: WiringRepository;
  plantAccess: PlantAccess;
  audit: AuditLog;
  log: Pick<Logger, 'info'>;
  /** MQTT topics ingest has seen (table mqtt_discovery). */
  ingestRepo: Pick<IngestRepository, 'discovery'>;
  /** OPC UA test and browse through the client ingest uses (one certificate). */
  opcua: Pick<OpcuaBrowseService, 'test' | 'browse'>;
}

export function createWiringService({ wiringRepo: repo, plantAccess, audit, log, ingestRepo, opcua }: WiringServiceDeps) {
  async function requireSource(principal: Principal, id: number) {
    const r = await repo.source(id);
    if (!r) throw new NotFoundError(`no source ${id}`);
    assertPlantScope(principal, r.source.plantId);
    return r;
  }
  async function requireTag(principal: Principal, id: number) {
    const r = await repo.tag(id);
    if (!r) throw new NotFoundError(`no tag ${id}`);
    assertPlantScope(principal, r.tag.plantId);
    return r;
  }
  /** A source of this plant for a tag, or a 422 under `field`. */
  async function sourceOfPlant(plantId: number, sourceId: number, field = 'sourceId'): Promise<SourceRow> {
    const r = await repo.source(sourceId);
    if (!r || r.source.plantId !== plantId) throw new ValidationError({ [field]: [`no source ${sourceId} in this plant`] });
    return r.source;
  }

  async function tagOut(t: TagRow, source: { name: string; kind: SourceKind }, maps?: MappingRow[], targets?: TargetRow[]): Promise<TagConfigOut> {
    maps ??= (await repo.mappings(t.plantId)).filter((m) => m.tagId === t.id);
    targets ??= await repo.targets(t.plantId);
    return {
      id: t.id,
      plantId: t.plantId,
      name: t.name,
      source: { id: t.sourceId, name: source.name, kind: source.kind },
      ...tagSettings(t),
      signals: maps.filter((m) => m.tagId === t.id).map((m) => mappingOut(m, targets)),
      createdAt: t.createdAt.toISOString(),
    };
  }
  function mappingOut(m: MappingRow, targets: TargetRow[]): MappingOut {
    return { id: m.id, signal: m.signal, targetType: m.targetType, targetId: m.targetId, targetCode: targets.find((t) => t.type === m.targetType && t.id === m.targetId)?.code ?? null, tagId: m.tagId };
  }

  /** Resolves a mapping target by code or id among the plant's targets of that type; null with a message when there is none. */
  function resolveTarget(targets: TargetRow[], type: TargetRow['type'], by: { code?: string; id?: number }): TargetRow | string {
    const ofType = targets.filter((t) => t.type === type);
    if (type === 'plant' && by.code === undefined && by.id === undefined) return ofType[0]!;
    const hit = ofType.find((t) => (by.code !== undefined ? t.code === by.code : t.id === by.id));
    if (hit) return hit;
    const known = ofType.map((t) => t.code).join(', ') || 'none';
    return `no ${type} ${by.code !== undefined ? `"${by.code}"` : by.id} in this plant (${type} codes: ${known})`;
  }

  return {
    // ---- sources ----
    async listSources(principal: Principal, plantId: number) {
      await plantAccess.requirePlant(principal, plantId);
      return { plantId, sources: (await repo.listSources(plantId)).map((r) => sourceOut(r.source, r.tags)) };
    },

    async getSource(principal: Actor, id: number): Promise<SourceOut> {
      const r = await requireSource(principal, id);
      return sourceOut(r.source, r.tags);
    },

    async createSource(principal: Actor, plantId: number, input: SourceCreate): Promise<SourceOut> {
      await plantAccess.requirePlant(principal, plantId);
      const row = await unique({ name: input.name }, () =>
        repo.insertSource({ plantId, name: input.name, kind: input.kind, url: input.url, username: input.username ?? null, secret: input.password ?? null, options: input.options ?? {}, enabled: input.enabled ?? true }),
      );
      await audit.record(principal, 'source.create', `source:${row.id}`, { plantId, name: row.name, kind: row.kind, url: row.url, username: row.username, hasSecret: row.secret !== null, options: row.options, enabled: row.enabled });
      return sourceOut(row, 0);
    },

    async updateSource(principal: Actor, id: number, patch: SourcePatch): Promise<SourceOut> {
      const { source: cur, tags } = await requireSource(principal, id);
      const fields: Record<string, string[]> = {};
      if (patch.url !== undefined) {
        const issue = sourceUrlIssue(cur.kind, patch.url);
        if (issue) fields.url = [issue];
      }
      let options: Record<string, unknown> | undefined;
      if (patch.options !== undefined) {
        const r = sourceOptionsSchema[cur.kind].safeParse(patch.options);
        if (r.success) options = r.data as Record<string, unknown>;
        else for (const [f, msgs] of Object.entries(zodFields(r.error))) fields[f === '_' ? 'options' : `options.${f}`] = msgs;
      }
      if (Object.keys(fields).length) throw new ValidationError(fields);
      const set: Partial<SourceRow> = {};
      if (patch.name !== undefined) set.name = patch.name;
      if (patch.url !== undefined) set.url = patch.url;
      if (patch.username !== undefined) set.username = patch.username;
      if (patch.password !== undefined) set.secret = patch.password;
      if (options !== undefined) set.options = options;
      if (patch.enabled !== undefined) set.enabled = patch.enabled;
      const row = await unique({ name: patch.name }, () => repo.updateSource(id, set));
      if (!row) throw new NotFoundError(`no source ${id}`);
      // What changed, never the password itself.
      const changed = Object.fromEntries(Object.entries(set).map(([k, v]) => (k === 'secret' ? ['password', v === null ? 'removed' : 'changed'] : [k, v])));
      await audit.record(principal, 'source.update', `source:${id}`, { plantId: row.plantId, changed });
      return sourceOut(row, tags);
    },

    async deleteSource(principal: Actor, id: number, force: boolean): Promise<{ deleted: true; id: number; tagsDeleted: number }> {
      const { source, tags } = await requireSource(principal, id);
      if (tags > 0 && !force) throw new ConflictError(`source ${id} still has ${tags} tag(s); delete them first, or repeat with ?force=1 to delete the source with its tags and their mappings (stored samples stay)`);
      if (!(await repo.deleteSource(id))) throw new NotFoundError(`no source ${id}`);
      await audit.record(principal, 'source.delete', `source:${id}`, { plantId: source.plantId, name: source.name, kind: source.kind, url: source.url, tagsDeleted: tags });
      return { deleted: true, id, tagsDeleted: tags };
    },

    async testSource(principal: Actor, id: number): Promise<ConnectionTestOut> {
      const { source } = await requireSource(principal, id);
      const out = source.kind === 'mqtt' ? await testMqtt(source) : await opcua.test(source);
      log.info({ source: id, ok: out.ok, latency_ms: out.latency_ms, error: out.error }, 'source connection test');
      return out;
    },

    async browse(principal: Actor, id: number, nodeId: string | undefined) {
      const { source } = await requireSource(principal, id);
      if (source.kind !== 'opcua') throw new ValidationError({ sourceId: ['browsing is for OPC UA sources; an MQTT source lists its topics under /discovery'] });
      return { sourceId: id, ...(await opcua.browse(source, nodeId)) };
    },

    /** Topics ingest has seen on an MQTT source (table `mqtt_discovery`, written by ingest). */
    async discovery(principal: Actor, id: number) {
      const { source } = await requireSource(principal, id);
      if (source.kind !== 'mqtt') throw new ValidationError({ sourceId: ['discovery lists MQTT topics; browse an OPC UA source instead'] });
      const rows = await ingestRepo.discovery(id);
      if (!rows.length) return { sourceId: id, asOf: null, topics: [], note: source.enabled ? 'ingest has not listed topics for this source yet (it saves them every few seconds while it is connected)' : 'the source is disabled, so ingest does not connect to it' };
      const asOf = new Date(Math.max(...rows.map((r) => r.lastSeen.getTime())));
      return { sourceId: id, asOf: asOf.toISOString(), topics: rows.map((r) => ({ ...r, firstSeen: r.firstSeen.toISOString(), lastSeen: r.lastSeen.toISOString() })) };
    },

    // ---- tags ----
    async listTags(principal: Principal, plantId: number) {
      await plantAccess.requirePlant(principal, plantId);
      const [rows, maps, targets] = await Promise.all([repo.listTags(plantId), repo.mappings(plantId), repo.targets(plantId)]);
      return { plantId, tags: await Promise.all(rows.map((r) => tagOut(r.tag, { name: r.sourceName, kind: r.sourceKind }, maps, targets))) };
    },

    async createTag(principal: Actor, plantId: number, input: TagCreate): Promise<TagConfigOut> {
      await plantAccess.requirePlant(principal, plantId);
      const src = await sourceOfPlant(plantId, input.sourceId);
      const issue = tagAddressIssue(src.kind, input.address);
      if (issue) throw new ValidationError({ address: [issue] });
      const row = await unique(input, () => repo.insertTag({ ...input, plantId }));
      await audit.record(principal, 'tag.create', `tag:${row.id}`, { plantId, ...input });
      return tagOut(row, src, []);
    },

    async updateTag(principal: Actor, id: number, patch: TagPatch): Promise<TagConfigOut> {
      const { tag: cur } = await requireTag(principal, id);
      const src = patch.sourceId !== undefined && patch.sourceId !== cur.sourceId ? await sourceOfPlant(cur.plantId, patch.sourceId) : (await repo.source(cur.sourceId))!.source;
      const fields: Record<string, string[]> = {};
      if (patch.address !== undefined || patch.sourceId !== undefined) {
        const issue = tagAddressIssue(src.kind, patch.address ?? cur.address);
        if (issue) fields.address = [issue];
      }
      const low = patch.rangeLow !== undefined ? patch.rangeLow : cur.rangeLow;
      const high = patch.rangeHigh !== undefined ? patch.rangeHigh : cur.rangeHigh;
      if (low !== null && high !== null && !(low < high)) fields.rangeHigh = [`rangeLow must be below rangeHigh (they would be ${low} and ${high})`];
      if (Object.keys(fields).length) throw new ValidationError(fields);
      const row = await unique({ name: patch.name ?? cur.name, address: patch.address ?? cur.address }, () => repo.updateTag(id, patch));
      if (!row) throw new NotFoundError(`no tag ${id}`);
      await audit.record(principal, 'tag.update', `tag:${id}`, { plantId: row.plantId, changed: patch });
      return tagOut(row, src);
    },

    async deleteTag(principal: Actor, id: number) {
      const { tag } = await requireTag(principal, id);
      if (!(await repo.deleteTag(id))) throw new NotFoundError(`no tag ${id}`);
      await audit.record(principal, 'tag.delete', `tag:${id}`, { plantId: tag.plantId, name: tag.name, sourceId: tag.sourceId, address: tag.address });
      return { deleted: true as const, id };
    },

    // ---- signal map ----
    async putMapping(principal: Actor, plantId: number, m: MappingPut) {
      await plantAccess.requirePlant(principal, plantId);
      const tag = await repo.tag(m.tagId);
      const targets = await repo.targets(plantId);
      const fields: Record<string, string[]> = {};
      if (!tag || tag.tag.plantId !== plantId) fields.tagId = [`no tag ${m.tagId} in this plant`];
      const target = resolveTarget(targets, m.targetType, { code: m.targetCode, id: m.targetId });
      if (typeof target === 'string') fields[m.targetCode !== undefined ? 'targetCode' : 'targetId'] = [target];
      if (Object.keys(fields).length) throw new ValidationError(fields);
      const t = target as TargetRow;
      const { row, replacedTagId } = await repo.putMapping({ plantId, signal: m.signal, targetType: t.type, targetId: t.id, tagId: m.tagId });
      await audit.record(principal, 'signal_map.put', `signal_map:${row.id}`, { plantId, signal: row.signal, targetType: row.targetType, targetId: row.targetId, targetCode: t.code, tagId: row.tagId, replacedTagId });
      return { ...mappingOut(row, targets), replacedTagId };
    },

    async deleteMapping(principal: Actor, id: number) {
      const m = await repo.mapping(id);
      if (!m) throw new NotFoundError(`no signal mapping ${id}`);
      assertPlantScope(principal, m.plantId);
      if (!(await repo.deleteMapping(id))) throw new NotFoundError(`no signal mapping ${id}`);
      await audit.record(principal, 'signal_map.delete', `signal_map:${id}`, { plantId: m.plantId, signal: m.signal, targetType: m.targetType, targetId: m.targetId, tagId: m.tagId });
      return { deleted: true as const, id };
    },

    /**
     * CSV tag list (RFC 4180, header row with TAG_CSV_COLUMNS). Every row is checked like the
     * form (plus: source by name, address fits the source kind, no duplicate name or
     * source+address in the file or the plant, signal fits its target). A dry run answers the
     * preview and the row errors; a real import stores all rows and mappings in one transaction
     * or, if any row is invalid, nothing (422 with `line.<n>.<column>`; the header is line 1).
     */
    /** `text` undefined: the upload was not a CSV body (415). */
    async importCsv(principal: Actor, plantId: number, text: string | undefined, dryRun: boolean): Promise<TagImportOut> {
      await plantAccess.requirePlant(principal, plantId);
      if (text === undefined) throw new UnsupportedMediaTypeError('send the file as the request body with Content-Type: text/csv');
      const parsed = await parseCsvUpload(text);
      if (!parsed.ok) throw new ValidationError({ [`line.${parsed.line}`]: [parsed.message] }, 'the file is not valid CSV (RFC 4180); nothing was stored');
      const [header, ...records] = parsed.records;
      if (!header) throw new ValidationError({ _: ['the file is empty; expected a header row and at least one tag'] });
      const cols = header.fields.map((c) => c.trim());
      const headerCheck = csvHeaderProblem(cols, TAG_CSV_COLUMNS, TAG_CSV_REQUIRED);
      if (headerCheck.message) {
        throw new ValidationError({ 'line.1': [`${headerCheck.message}; the columns are ${TAG_CSV_COLUMNS.join(', ')}`] }, 'the header row is not usable; nothing was stored');
      }
      if (!records.length) throw new ValidationError({ _: ['the file has a header but no tags'] });
      if (records.length > TAG_CSV_MAX_ROWS) throw new ValidationError({ _: [`at most ${TAG_CSV_MAX_ROWS} rows per file; this one has ${records.length}`] });

      const [plantSources, existingNames, targets] = await Promise.all([repo.listSources(plantId), repo.tagNames(plantId), repo.targets(plantId)]);
      const existingAddr = await repo.tagAddresses(plantSources.map((s) => s.source.id));
      const errors: Record<string, string[]> = {};
      const add = (line: number, col: string, msg: string) => (errors[`line.${line}.${col}`] ??= []).push(msg);
      const rows: TagImportRow[] = [];
      const inserts: NewTagRow[] = [];
      const maps: Array<{ row: number; plantId: number; signal: string; targetType: TargetRow['type']; targetId: number }> = [];
      const seenName = new Map<string, number>();
      const seenAddr = new Map<string, number>();
      const seenSignal = new Map<string, number>();
      const bad = new Set<number>();

      for (const rec of records) {
        const line = rec.line;
        if (rec.fields.length !== cols.length) {
          errors[`line.${line}`] = [`${rec.fields.length} fields where the header has ${cols.length} (RFC 4180 §2 rule 4)`];
          bad.add(line);
          continue;
        }
        const cell = (c: string) => (cols.includes(c) ? rec.fields[cols.indexOf(c)]!.trim() : '');
        const before = Object.keys(errors).length;
        const srcText = cell('source');
        const src = plantSources.find((s) => s.source.name === srcText)?.source ?? (/^\d+$/.test(srcText) ? plantSources.find((s) => s.source.id === Number(srcText))?.source : undefined);
        if (!srcText) add(line, 'source', 'required: the name of a source of this plant');
        else if (!src) add(line, 'source', `no source "${srcText}" in this plant (sources: ${plantSources.map((s) => s.source.name).join(', ') || 'none'})`);
        // The source cell is checked above; a stand-in id lets the form schema check the other cells.
        const obj: Record<string, unknown> = { sourceId: src?.id ?? 1 };
        for (const [field, col] of Object.entries(CSV_COLUMN_OF)) {
          if (field === 'sourceId') continue;
          const v = cell(col);
          if (v === '') continue;
          if (['name', 'address', 'unit', 'description'].includes(field)) obj[field] = v;
          else if (typeof csvNumber(v) === 'number') obj[field] = Number(v);
          // Said here in the column's words (zod's own text would name a JSON type).
          else add(line, col, `${col} must be a number in plain decimal notation, like 0.5 or -12 (got "${v}")`);
        }
        const r = tagCreate.safeParse(obj);
        if (!r.success) for (const [f, msgs] of Object.entries(zodFields(r.error))) for (const msg of msgs) add(line, CSV_COLUMN_OF[f] ?? f, msg);
        const name = cell('name');
        const address = cell('address');
        if (name) {
          if (existingNames.has(name)) add(line, 'name', `the plant already has a tag named "${name}"`);
          else if (seenName.has(name)) add(line, 'name', `"${name}" is also on line ${seenName.get(name)}`);
          else seenName.set(name, line);
        }
        if (src && address) {
          const issue = tagAddressIssue(src.kind, address);
          const key = `${src.id}\u0000${address}`;
          if (issue) add(line, 'address', issue);
          else if (existingAddr.has(key)) add(line, 'address', `source "${src.name}" already has a tag at this address`);
          else if (seenAddr.has(key)) add(line, 'address', `the same source and address are also on line ${seenAddr.get(key)}`);
          else seenAddr.set(key, line);
        }
        const signal = cell('signal');
        const targetCode = cell('target');
        let target: TargetRow | undefined;
        if (signal) {
          if (!(SIGNAL_KINDS as readonly string[]).includes(signal)) add(line, 'signal', `unknown signal; one of ${SIGNAL_KINDS.join(', ')}`);
          else {
            const type = signalTargetType(signal as (typeof SIGNAL_KINDS)[number]);
            if (type !== 'plant' && !targetCode) add(line, 'target', `${signal} needs the code of a ${type}`);
            else {
              const t = resolveTarget(targets, type, targetCode ? { code: targetCode } : {});
              if (typeof t === 'string') add(line, 'target', t);
              else {
                const key = `${signal}@${t.type}:${t.id}`;
                if (seenSignal.has(key)) add(line, 'signal', `${signal} of ${t.code} is also mapped on line ${seenSignal.get(key)}`);
                else {
                  seenSignal.set(key, line);
                  target = t;
                }
              }
            }
          }
        } else if (targetCode) add(line, 'signal', 'a target without a signal: give the signal too, or leave target empty');

        if (Object.keys(errors).length > before || !r.success || !src) {
          bad.add(line);
          if (r.success) rows.push(previewRow(line, r.data, src, srcText, signal || null, targetCode || null));
          continue;
        }
        rows.push(previewRow(line, r.data, src, srcText, signal || null, targetCode || null));
        if (target) maps.push({ row: inserts.length, plantId, signal, targetType: target.type, targetId: target.id });
        inserts.push({ ...r.data, sourceId: src.id, plantId });
      }

      const ok = bad.size === 0;
      if (dryRun) return { dryRun: true, ok, rows, errors, imported: 0, tagIds: [], mappings: maps.length };
      if (!ok) throw new ValidationError(errors, `${bad.size} of ${records.length} rows have errors (line numbers count the header as line 1); nothing was stored — fix them and upload the whole file again`);
      const stored = await unique({}, () => repo.importTags(inserts, maps));
      await audit.record(principal, 'tag.import', `plant:${plantId}`, { plantId, rows: stored.length, ids: stored.map((t) => t.id), mappings: maps.length });
      return { dryRun: false, ok: true, rows, errors: {}, imported: stored.length, tagIds: stored.map((t) => t.id), mappings: maps.length };
    },
  };
}

function previewRow(line: number, t: TagCreate, src: SourceRow | undefined, sourceText: string, signal: string | null, target: string | null): TagImportRow {
  return {
    line,
    name: t.name,
    sourceId: src?.id ?? null,
    source: src?.name ?? sourceText,
    address: t.address,
    unit: t.unit,
    description: t.description ?? '',
    scaleGain: t.scaleGain ?? 1,
    scaleOffset: t.scaleOffset ?? 0,
    deadband: t.deadband ?? 0,
    expectedPeriod_s: t.expectedPeriod_s ?? 10,
    rangeLow: t.rangeLow ?? null,
    rangeHigh: t.rangeHigh ?? null,
    signal,
    target,
  };
}
export type WiringService = ReturnType<typeof createWiringService>;
