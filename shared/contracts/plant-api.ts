import { z } from 'zod';
import { QUALITY_FLAG, type QualityFlag } from './sample-quality.ts';

/**
 * Request and response schemas of the read API (`GET /api/v1/plants/…`): plants and their
 * layout, live tag values, tag history, balances, alarms, the live stream.
 *
 * Conventions: timestamps are ISO 8601 UTC strings on the wire; every number carries its unit in
 * the field name (m3h = m³/h, m3 = m³, m2 = m², m = metres, s = seconds). Query parameters are
 * strings in a URL, so numbers are coerced. Table routes also answer `text/csv` (RFC 4180) with
 * `?format=csv` or `Accept: text/csv`; list routes page with an opaque `cursor` and `limit`.
 */

const positiveId = (what: string) => z.coerce.number().int().positive().max(2_147_483_647).meta({ description: what });
const iso = (description: string) => z.iso.datetime({ offset: true }).meta({ description });
const isoOut = (description: string) => z.string().meta({ description });

export const plantParams = z.object({ plantId: positiveId('plant id') }).strict();
export const tagParams = z.object({ plantId: positiveId('plant id'), tagId: positiveId('tag id') }).strict();
export type PlantParams = z.infer<typeof plantParams>;
export type TagParams = z.infer<typeof tagParams>;

export const formatParam = z.enum(['json', 'csv']).optional().meta({ description: 'csv answers text/csv (RFC 4180); same as Accept: text/csv' });

/** Query of every table route: only the output format. */
export const tableQuery = z.object({ format: formatParam }).strict();

export const MAX_PAGE = 10_000;
const pageFields = {
  cursor: z.string().max(512).optional().meta({ description: 'opaque cursor from nextCursor of the previous page' }),
  limit: z.coerce.number().int().min(1).max(MAX_PAGE).optional().meta({ description: `rows per page (1…${MAX_PAGE})` }),
  format: formatParam,
};
const nextCursor = z.string().nullable().meta({ description: 'cursor of the next page; null on the last page' });

// Epoch-ms comparisons after the ISO parse: from must be before to.
const window = <T extends { from?: string; to?: string }>(q: T) => {
  const a = q.from ? Date.parse(q.from) : NaN;
  const b = q.to ? Date.parse(q.to) : NaN;
  return Number.isNaN(a) || Number.isNaN(b) || a < b;
};
const windowIssue = { message: 'from must be before to', path: ['to'] };

// ---- plants ----
export const plantSummary = z
  .object({
    id: z.number().int(),
    code: z.string(),
    name: z.string(),
    timezone: z.string(),
    peakFlow_m3h: z.number().nullable().meta({ description: 'peak wet-weather flow [m³/h]' }),
    unitSystem: z.enum(['SI', 'US']).meta({ description: 'display units of the plant (values on the wire stay SI)' }),
    retiredAt: isoOut('retired (history kept, no longer computed)').nullable(),
    createdAt: isoOut('created'),
  })
  .meta({ id: 'PlantSummary' });
export type PlantSummary = z.infer<typeof plantSummary>;

export const plantLayoutOut = plantSummary
  .extend({
    trains: z.array(
      z.object({
        id: z.number().int(),
        code: z.string(),
        name: z.string(),
        basins: z.array(z.object({ id: z.number().int(), code: z.string(), name: z.string(), volume_m3: z.number(), aeratedFraction: z.number().meta({ description: 'aerated share of the volume, 0–1' }), sideWaterDepth_m: z.number().nullable() })),
        clarifiers: z.array(z.object({ id: z.number().int(), code: z.string(), name: z.string(), area_m2: z.number(), sideWaterDepth_m: z.number(), feedDepth_m: z.number().nullable(), count: z.number().int() })),
        pumps: z.array(z.object({ id: z.number().int(), code: z.string(), name: z.string(), kind: z.enum(['ras', 'was']), capacity_m3h: z.number(), clarifierId: z.number().int().nullable() })),
      }),
    ),
  })
  .meta({ id: 'PlantLayout', description: 'a plant with its trains and the basins, clarifiers and pumps in service now, with the geometry that holds now' });
export type PlantLayoutOut = z.infer<typeof plantLayoutOut>;

// ---- quality on the wire ----
export const QUALITY_FLAG_NAMES = Object.keys(QUALITY_FLAG) as [QualityFlag, ...QualityFlag[]];
export const qualityOut = z
  .object({
    code: z.number().int().meta({ description: 'stored quality code (shared/contracts/sample-quality.ts)' }),
    grade: z.enum(['good', 'uncertain', 'bad']),
    flags: z.array(z.enum(QUALITY_FLAG_NAMES)),
  })
  .meta({ id: 'SampleQuality' });
export type QualityOut = z.infer<typeof qualityOut>;

// ---- tags (live) ----
export const tagLive = z
  .object({
    id: z.number().int(),
    name: z.string(),
    description: z.string(),
    unit: z.string(),
    enabled: z.boolean(),
    expectedPeriod_s: z.number(),
    source: z.object({ id: z.number().int(), name: z.string(), kind: z.enum(['mqtt', 'opcua']) }),
    signals: z.array(z.object({ signal: z.string(), targetType: z.enum(['plant', 'train', 'basin', 'clarifier', 'pump']), targetId: z.number().int(), targetCode: z.string().nullable() })),
    value: z.number().nullable().meta({ description: 'latest value in the tag unit; null when none yet or the source sent none' }),
    ts: isoOut('source timestamp of the latest value').nullable(),
    age_s: z.number().nullable().meta({ description: 'seconds since the latest value [s]' }),
    stale: z.boolean().meta({ description: 'no value, or older than 3 × the expected period' }),
    quality: qualityOut.nullable(),
  })
  .meta({ id: 'TagLive' });
export type TagLive = z.infer<typeof tagLive>;
export const tagsResponse = z.object({ plantId: z.number().int(), asOf: isoOut('server time of the answer'), tags: z.array(tagLive) }).meta({ id: 'TagsResponse' });

// ---- samples ----
export const AGGS = ['mean', 'min', 'max', 'last'] as const;
export const RESOLUTIONS = ['raw', '1m', '1h'] as const;
export type Agg = (typeof AGGS)[number];
export type Resolution = (typeof RESOLUTIONS)[number];
/** Points a history answer aims to stay under (DESIGN §5). */
export const MAX_POINTS = 2000;

export const samplesQuery = z
  .object({
    from: iso('start, inclusive (ISO 8601); default: to − 1 h').optional(),
    to: iso('end, exclusive (ISO 8601); default: now').optional(),
    step: z.coerce.number().int().min(1).max(31_622_400).optional().meta({ description: 'bucket width [s]; rounded up to what the resolution allows (raw 1 s, 1m 60 s, 1h 3600 s) and to keep ≤ ~2000 points' }),
    agg: z.enum(AGGS).optional().meta({ description: 'value of a bucket: mean (default), min, max or last' }),
    ...pageFields,
  })
  .strict()
  .refine(window, windowIssue);
export type SamplesQuery = z.infer<typeof samplesQuery>;

export const samplePoint = z
  .object({
    ts: isoOut('sample time (raw) or bucket start'),
    value: z.number().nullable().meta({ description: 'value in the tag unit (agg of the bucket when bucketed)' }),
    min: z.number().optional(),
    max: z.number().optional(),
    count: z.number().int().optional().meta({ description: 'samples in the bucket' }),
    quality: z.enum(['good', 'uncertain', 'bad']).meta({ description: 'grade; worst in the bucket' }),
    flags: z.array(z.enum(QUALITY_FLAG_NAMES)).optional().meta({ description: 'why a point was downgraded (omitted when none)' }),
  })
  .meta({ id: 'SamplePoint' });
export type SamplePoint = z.infer<typeof samplePoint>;

export const samplesResponse = z
  .object({
    tagId: z.number().int(),
    unit: z.string(),
    from: isoOut('window start'),
    to: isoOut('window end'),
    resolution: z.enum(RESOLUTIONS).meta({ description: 'raw samples, rollup_1m or rollup_1h' }),
    step_s: z.number().int().nullable().meta({ description: 'bucket width [s]; null = raw samples, one point each' }),
    agg: z.enum(AGGS),
    points: z.array(samplePoint).meta({ description: 'ascending by ts; an empty bucket is left out (gaps stay gaps)' }),
    nextCursor,
  })
  .meta({ id: 'SamplesResponse' });
export type SamplesResponse = z.infer<typeof samplesResponse>;

// ---- balances ----
export const balanceQuality = z.enum(['good', 'estimated', 'unavailable']);
export const balanceOut = z
  .object({
    id: z.number().int(),
    ts: isoOut('time of the computation'),
    quality: balanceQuality,
    data: z.record(z.string(), z.unknown()).meta({ description: 'figures of the balance engine (field names carry units)' }),
    inputs: z.record(z.string(), z.unknown()).meta({ description: 'inputs used and their quality' }),
  })
  .meta({ id: 'Balance' });
export type BalanceOut = z.infer<typeof balanceOut>;

export const balanceLiveResponse = z
  .object({
    plantId: z.number().int(),
    balance: balanceOut.nullable(),
    age_s: z.number().nullable().meta({ description: 'seconds since the computation [s]' }),
    reason: z.string().optional().meta({ description: 'why balance is null (no computation yet)' }),
  })
  .meta({ id: 'BalanceLive' });

export const balanceHistoryQuery = z
  .object({
    from: iso('start, inclusive; default: to − 24 h').optional(),
    to: iso('end, exclusive; default: now').optional(),
    step: z.coerce.number().int().min(1).max(31_622_400).optional().meta({ description: 'bucket width [s]; raised so the window has ≤ 2000 buckets' }),
    ...pageFields,
  })
  .strict()
  .refine(window, windowIssue);
export type BalanceHistoryQuery = z.infer<typeof balanceHistoryQuery>;

export const balanceHistoryRow = balanceOut
  .omit({ inputs: true })
  .extend({
    bucket: isoOut('bucket start'),
    computations: z.number().int().meta({ description: 'balance computations in the bucket; the row is the last of them' }),
    worstQuality: balanceQuality.meta({ description: 'worst quality among the computations of the bucket' }),
  })
  .meta({ id: 'BalanceHistoryRow' });
export type BalanceHistoryRow = z.infer<typeof balanceHistoryRow>;
export const balanceHistoryResponse = z
  .object({ plantId: z.number().int(), from: isoOut('window start'), to: isoOut('window end'), step_s: z.number().int(), rows: z.array(balanceHistoryRow), nextCursor })
  .meta({ id: 'BalanceHistory' });

// ---- alarms ----
export const ALARM_STATES = ['raised', 'acknowledged', 'cleared'] as const;
export const alarmsQuery = z
  .object({
    state: z.enum(ALARM_STATES).optional().meta({ description: 'only alarms in this state' }),
    from: iso('raised at or after').optional(),
    to: iso('raised before').optional(),
    ...pageFields,
  })
  .strict()
  .refine(window, windowIssue);
export type AlarmsQuery = z.infer<typeof alarmsQuery>;

export const alarmOut = z
  .object({
    id: z.number().int(),
    rule: z.string(),
    target: z.string(),
    priority: z.number().int(),
    state: z.enum(ALARM_STATES),
    message: z.string(),
    value: z.number().nullable(),
    limit: z.number().nullable(),
    raisedAt: isoOut('raised'),
    acknowledgedAt: isoOut('acknowledged').nullable(),
    acknowledgedBy: z.number().int().nullable(),
    clearedAt: isoOut('cleared').nullable(),
    suppressedReason: z.string().nullable().meta({ description: 'ISA-18.2 designed suppression: why the active alarm is not annunciated (null: annunciated)' }),
    shelvedUntil: isoOut('shelved until (ISA-18.2 shelving; null: not shelved)').nullable(),
    shelveReason: z.string().nullable(),
  })
  .meta({ id: 'Alarm' });
export type AlarmOut = z.infer<typeof alarmOut>;
export const alarmsResponse = z.object({ plantId: z.number().int(), alarms: z.array(alarmOut).meta({ description: 'newest raised first' }), nextCursor }).meta({ id: 'Alarms' });

// ---- stream ----
export const STREAM_EVENTS = ['tag', 'balance', 'alarm'] as const;
export type StreamEventName = (typeof STREAM_EVENTS)[number];
export const streamQuery = z
  .object({ events: z.string().regex(/^(tag|balance|alarm)(,(tag|balance|alarm))*$/, 'comma-separated list of tag, balance, alarm').optional().meta({ description: 'events to receive; default all' }) })
  .strict();
/** Data of a `tag` stream event: one changed live value. */
export const streamTagEvent = z.object({ tagId: z.number().int(), ts: z.string(), value: z.number().nullable(), quality: z.number().int() });
export type StreamTagEvent = z.infer<typeof streamTagEvent>;
