import { z } from 'zod';
import { SIGNAL_KINDS } from './plant-layout.ts';
import {
  aeratedFraction,
  area_m2,
  capacity_m3h,
  depth_m,
  peakFlow_m3h,
  PUMP_KINDS,
  timeZone,
  unitCode,
  unitName,
  unitSystem,
  volume_m3,
} from './plant-model.ts';
import { SETTINGS, type SettingKey } from './settings.ts';
import { mqttOptionsInput, opcuaOptionsInput, sourceUrlIssue } from './wiring.ts';

/**
 * The plant configuration document (format version 1): one JSON document describing a whole
 * plant — the plant, its process model (trains, aeration basins, secondary clarifiers, pumps
 * with their current geometry and its effective-dated history), its own settings, its data
 * sources (never their secrets), tags and signal map. `GET /api/v1/plants/:plantId/config`
 * answers it; `POST /api/v1/plants` creates a new plant from it; `PUT …/config?dryRun=1` lists
 * what applying it would change, without dryRun applies it in one transaction.
 *
 * Units are referenced by code (never by database id), sources and tags by name, so a document
 * moves between installs (test → production) and fits in version control. All values are SI.
 *
 * Geometry: `history` (oldest first) is authoritative when present; when the current fields
 * (volume_m3, …) differ from what the history gives now, the difference is a new version from
 * the time the document is applied. A unit without `history` gets one version from its current
 * fields.
 */

export const CONFIG_FORMAT_VERSION = 1 as const;
const iso = z.iso.datetime({ offset: true });

const basinVersion = z.object({ effectiveFrom: iso, volume_m3, aeratedFraction, sideWaterDepth_m: depth_m.nullable().default(null), inService: z.boolean().default(true) }).strict();
const clarifierVersion = z
  .object({ effectiveFrom: iso, area_m2, sideWaterDepth_m: depth_m, feedDepth_m: depth_m.nullable().default(null), count: z.number().int().min(1).max(100).default(1), inService: z.boolean().default(true) })
  .strict();
const pumpVersion = z.object({ effectiveFrom: iso, capacity_m3h, inService: z.boolean().default(true) }).strict();

export const configBasin = z
  .object({
    code: unitCode,
    name: unitName,
    volume_m3,
    aeratedFraction: aeratedFraction.default(1),
    sideWaterDepth_m: depth_m.nullable().default(null),
    inService: z.boolean().default(true),
    history: z.array(basinVersion).optional().meta({ description: 'geometry versions, oldest first' }),
  })
  .strict()
  .meta({ id: 'ConfigAerationBasin' });
export const configClarifier = z
  .object({
    code: unitCode,
    name: unitName,
    area_m2,
    sideWaterDepth_m: depth_m,
    feedDepth_m: depth_m.nullable().default(null),
    count: z.number().int().min(1).max(100).default(1),
    inService: z.boolean().default(true),
    history: z.array(clarifierVersion).optional(),
  })
  .strict()
  .meta({ id: 'ConfigSecondaryClarifier' });
export const configPump = z
  .object({
    code: unitCode,
    name: unitName,
    kind: z.enum(PUMP_KINDS),
    capacity_m3h,
    servesClarifier: unitCode.nullable().default(null).meta({ description: 'code of the clarifier (same train) the pump draws from; null = the train as a whole' }),
    inService: z.boolean().default(true),
    history: z.array(pumpVersion).optional(),
  })
  .strict()
  .meta({ id: 'ConfigPump' });
export const configTrain = z
  .object({
    code: unitCode,
    name: unitName,
    aerationBasins: z.array(configBasin).default([]),
    secondaryClarifiers: z.array(configClarifier).default([]),
    pumps: z.array(configPump).default([]),
  })
  .strict()
  .meta({ id: 'ConfigTrain' });

/** Stands in for a password: the document never carries secrets; they are set on the source afterwards. */
export const secretRequired = z.object({ secretRequired: z.literal(true) }).strict().meta({ description: 'the source needs a password, set it with PATCH /api/v1/sources/:sourceId' });

export const configSource = z
  .discriminatedUnion('kind', [
    z.object({ kind: z.literal('mqtt'), name: z.string().trim().min(1).max(64), url: z.string().max(2048), username: z.string().min(1).max(256).nullable().default(null), password: secretRequired.nullable().default(null), options: mqttOptionsInput.default({}), enabled: z.boolean().default(true) }).strict(),
    z.object({ kind: z.literal('opcua'), name: z.string().trim().min(1).max(64), url: z.string().max(2048), username: z.string().min(1).max(256).nullable().default(null), password: secretRequired.nullable().default(null), options: opcuaOptionsInput.default({}), enabled: z.boolean().default(true) }).strict(),
  ])
  .superRefine((s, ctx) => {
    const issue = sourceUrlIssue(s.kind, s.url);
    if (issue) ctx.addIssue({ code: 'custom', path: ['url'], message: issue });
  })
  .meta({ id: 'ConfigSource' });

export const configTag = z
  .object({
    name: z.string().trim().min(1).max(64),
    source: z.string().min(1).max(64).meta({ description: 'name of the source in `sources`' }),
    address: z.string().min(1).max(4096).meta({ description: 'MQTT topic or OPC UA NodeId' }),
    unit: z.string().min(1).max(32),
    description: z.string().max(500).default(''),
    scaleGain: z.number().finite().default(1),
    scaleOffset: z.number().finite().default(0),
    deadband: z.number().min(0).default(0),
    expectedPeriod_s: z.number().positive().max(86_400).default(10),
    rangeLow: z.number().finite().nullable().default(null),
    rangeHigh: z.number().finite().nullable().default(null),
    samplingInterval_ms: z.number().int().min(0).max(3_600_000).nullable().default(null),
    kind: z.enum(['analog', 'state', 'counter']).default('analog').meta({ description: 'analog, state (e.g. pump running) or counter; only analog tags are checked for a flat line' }),
    enabled: z.boolean().default(true),
  })
  .strict()
  .meta({ id: 'ConfigTag' });

export const TARGET_TYPES = ['plant', 'train', 'basin', 'clarifier', 'pump'] as const;
export const configSignal = z
  .object({
    signal: z.enum(SIGNAL_KINDS),
    target: z.object({ type: z.enum(TARGET_TYPES), code: unitCode.nullable().default(null).meta({ description: 'unit code; null for the plant itself' }) }).strict(),
    tag: z.string().min(1).max(64).meta({ description: 'name of the tag in `tags`' }),
  })
  .strict()
  .meta({ id: 'ConfigSignal' });

export const configPlant = z
  .object({ code: unitCode, name: unitName, timezone: timeZone.default('UTC'), peakFlow_m3h: peakFlow_m3h.nullable().default(null), unitSystem: unitSystem.default('SI') })
  .strict();

const settingsDoc = z.record(z.string(), z.unknown()).superRefine((o, ctx) => {
  for (const [k, v] of Object.entries(o)) {
    if (!(k in SETTINGS)) {
      ctx.addIssue({ code: 'custom', path: [k], message: 'unknown setting' });
      continue;
    }
    const r = SETTINGS[k as SettingKey].schema.safeParse(v);
    if (!r.success) ctx.addIssue({ code: 'custom', path: [k], message: r.error.issues[0]?.message ?? 'invalid value' });
  }
});

/** Names that must be unique in their list; an issue per duplicate. */
function unique<T>(ctx: z.RefinementCtx, list: T[], key: (x: T) => string, path: (i: number) => (string | number)[], what: string) {
  const seen = new Set<string>();
  list.forEach((x, i) => {
    const k = key(x);
    if (seen.has(k)) ctx.addIssue({ code: 'custom', path: path(i), message: `${what} "${k}" appears twice` });
    seen.add(k);
  });
}

const documentFields = {
  formatVersion: z.literal(CONFIG_FORMAT_VERSION),
  plant: configPlant,
  model: z.object({ trains: z.array(configTrain).default([]) }).strict().default({ trains: [] }),
  settings: settingsDoc.default({}).meta({ description: "the plant's own setting overrides (keys of GET /api/v1/settings)" }),
  sources: z.array(configSource).default([]),
  tags: z.array(configTag).default([]),
  signalMap: z.array(configSignal).default([]),
};
type DocumentShape = z.infer<z.ZodObject<typeof documentFields>>;

/** Cross-references of a document: codes and names unique, every reference resolves. */
function checkDocument(d: DocumentShape, ctx: z.RefinementCtx): void {
    const trains = d.model.trains;
    unique(ctx, trains, (t) => t.code, (i) => ['model', 'trains', i, 'code'], 'train code');
    const units = (k: 'aerationBasins' | 'secondaryClarifiers' | 'pumps') => trains.flatMap((t, ti) => t[k].map((u, ui) => ({ code: u.code, path: ['model', 'trains', ti, k, ui, 'code'] })));
    for (const k of ['aerationBasins', 'secondaryClarifiers', 'pumps'] as const) {
      const list = units(k);
      unique(ctx, list, (u) => u.code, (i) => list[i]!.path, 'unit code');
    }
    trains.forEach((t, ti) =>
      t.pumps.forEach((p, pi) => {
        if (p.servesClarifier !== null && !t.secondaryClarifiers.some((c) => c.code === p.servesClarifier)) {
          ctx.addIssue({ code: 'custom', path: ['model', 'trains', ti, 'pumps', pi, 'servesClarifier'], message: `no clarifier "${p.servesClarifier}" in train ${t.code}` });
        }
      }),
    );
    unique(ctx, d.sources, (s) => s.name, (i) => ['sources', i, 'name'], 'source name');
    unique(ctx, d.tags, (t) => t.name, (i) => ['tags', i, 'name'], 'tag name');
    const sources = new Set(d.sources.map((s) => s.name));
    d.tags.forEach((t, i) => {
      if (!sources.has(t.source)) ctx.addIssue({ code: 'custom', path: ['tags', i, 'source'], message: `no source "${t.source}" in sources` });
      if (t.rangeLow !== null && t.rangeHigh !== null && t.rangeLow >= t.rangeHigh) ctx.addIssue({ code: 'custom', path: ['tags', i, 'rangeHigh'], message: 'rangeLow must be below rangeHigh' });
    });
    const tags = new Set(d.tags.map((t) => t.name));
    const codes = {
      plant: new Set<string>(),
      train: new Set(trains.map((t) => t.code)),
      basin: new Set(units('aerationBasins').map((u) => u.code)),
      clarifier: new Set(units('secondaryClarifiers').map((u) => u.code)),
      pump: new Set(units('pumps').map((u) => u.code)),
    };
    unique(ctx, d.signalMap, (m) => `${m.signal}@${m.target.type}:${m.target.code ?? ''}`, (i) => ['signalMap', i, 'signal'], 'mapping');
    d.signalMap.forEach((m, i) => {
      if (!tags.has(m.tag)) ctx.addIssue({ code: 'custom', path: ['signalMap', i, 'tag'], message: `no tag "${m.tag}" in tags` });
      const wantType = m.signal.split('.')[0];
      if (wantType !== m.target.type) ctx.addIssue({ code: 'custom', path: ['signalMap', i, 'target', 'type'], message: `${m.signal} belongs to a ${wantType}` });
      if (m.target.type === 'plant' ? m.target.code !== null : m.target.code === null || !codes[m.target.type].has(m.target.code)) {
        ctx.addIssue({ code: 'custom', path: ['signalMap', i, 'target', 'code'], message: m.target.type === 'plant' ? 'the plant target has no code (null)' : `no ${m.target.type} "${m.target.code}" in the model` });
      }
    });
}

export const plantConfig = z
  .object(documentFields)
  .strict()
  .superRefine(checkDocument)
  .meta({ id: 'PlantConfig', description: 'a whole plant as one document (format version 1); units by code, sources and tags by name, SI values, no secrets' });
export type PlantConfig = z.infer<typeof plantConfig>;

/** POST /plants with a document; top-level code and name (or the query's) override the document's, so a copy gets its own. */
export const plantConfigCreate = z
  .object({ ...documentFields, code: unitCode.optional().meta({ description: 'overrides plant.code' }), name: unitName.optional().meta({ description: 'overrides plant.name' }) })
  .strict()
  .superRefine(checkDocument)
  .meta({ id: 'PlantConfigCreate' });
export type PlantConfigCreate = z.infer<typeof plantConfigCreate>;
export type PlantConfigInput = z.input<typeof plantConfig>;

export const CHANGE_OPS = ['add', 'update', 'remove'] as const;
export const configChange = z
  .object({
    op: z.enum(CHANGE_OPS),
    path: z.string().meta({ description: 'dotted path by code/name, e.g. model.trains.t1.aerationBasins.ab1.history.2026-01-01T00:00:00.000Z' }),
    before: z.unknown().optional(),
    after: z.unknown().optional(),
  })
  .meta({ id: 'ConfigChange' });
export type ConfigChange = z.infer<typeof configChange>;

export const configPutQuery = z.object({ dryRun: z.enum(['0', '1']).optional().meta({ description: '1 only lists the changes' }) }).strict();
export const configPutOut = z.object({ plantId: z.number().int(), applied: z.boolean(), changes: z.array(configChange) }).meta({ id: 'ConfigPutResult' });

/** POST /plants with a document: code and name may be overridden (a copy of a plant needs its own code). */
export const plantCreateQuery = z.object({ code: unitCode.optional(), name: unitName.optional() }).strict();
