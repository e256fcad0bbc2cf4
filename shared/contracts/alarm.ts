import { z } from 'zod';

/**
 * Alarm rules, states and the acknowledge request. States follow the ISA-18.2 alarm state model
 * (ANSI/ISA-18.2-2016, "Management of Alarm Systems for the Process Industries", clause 11)
 * folded onto three stored states: `raised` (active, unacknowledged), `acknowledged` (active,
 * acknowledged) and `cleared` (returned to normal; `acknowledgedAt` null means it returned
 * unacknowledged and can still be acknowledged). Priorities 1 (highest) … 4.
 */
export const ALARM_RULES = [
  'ingest-down',
  'ingest-spool',
  'mlss-low',
  'stored-fraction-high',
  'blanket-high',
  'blanket-rising',
  'ras-concentration-margin-low',
  'ras-pump-margin-low',
  'srt-off-target',
  'tag-stale',
  'tag-bad',
] as const;
export const alarmRule = z.enum(ALARM_RULES);
export type AlarmRule = z.infer<typeof alarmRule>;

/** Priority of each rule: 1 the monitor is blind; 2 the process is at or near a limit; 3 trend or off target; 4 one instrument. */
export const ALARM_PRIORITY: Record<AlarmRule, 1 | 2 | 3 | 4> = {
  'ingest-down': 1,
  'ingest-spool': 1,
  'mlss-low': 2,
  'blanket-high': 2,
  'ras-concentration-margin-low': 2,
  'ras-pump-margin-low': 2,
  'stored-fraction-high': 3,
  'blanket-rising': 3,
  'srt-off-target': 3,
  'tag-bad': 3,
  'tag-stale': 4,
};

export const alarmState = z.enum(['raised', 'acknowledged', 'cleared']);
export type AlarmState = z.infer<typeof alarmState>;

export const alarmOut = z.object({
  id: z.number().int(),
  plantId: z.number().int(),
  rule: z.string(),
  target: z.string(),
  priority: z.number().int().min(1).max(4),
  state: alarmState,
  message: z.string(),
  value: z.number().nullable(),
  limit: z.number().nullable(),
  raisedAt: z.iso.datetime(),
  acknowledgedAt: z.iso.datetime().nullable(),
  acknowledgedBy: z.number().int().nullable(),
  clearedAt: z.iso.datetime().nullable(),
  /** ISA-18.2 designed suppression: why the active alarm is not annunciated (null: annunciated). */
  suppressedReason: z.string().nullable(),
  /** ISA-18.2 shelving: not annunciated until this time (null: not shelved). */
  shelvedUntil: z.iso.datetime().nullable(),
  shelvedBy: z.number().int().nullable(),
  shelveReason: z.string().nullable(),
});
export type AlarmOut = z.infer<typeof alarmOut>;

export const alarmAckParams = z.strictObject({ plantId: z.coerce.number().int().positive(), alarmId: z.coerce.number().int().positive() });
export const alarmAckRequest = z.strictObject({ comment: z.string().max(500).optional() });

/** Longest shelving an operator can set: 8 h, one shift (ISA-18.2 shelving always expires) [ours]. */
export const ALARM_SHELVE_MAX_MIN = 480;
export const alarmIdParams = z.strictObject({ alarmId: z.coerce.number().int().positive() });
export const alarmShelveRequest = z.strictObject({
  minutes: z.number().int().min(1).max(ALARM_SHELVE_MAX_MIN).meta({ description: `shelved for this many minutes (1 … ${ALARM_SHELVE_MAX_MIN})` }),
  reason: z.string().trim().min(1).max(500),
});
export const alarmUnshelveRequest = z.strictObject({ comment: z.string().max(500).optional() });

/** Bucket length of the alarm-rate summary (ISA-18.2 / EEMUA 191 measure alarm floods per 10 minutes). */
export const ALARM_SUMMARY_BUCKET_MIN = 10;
export const alarmSummaryQuery = z
  .strictObject({ from: z.iso.datetime({ offset: true }).optional(), to: z.iso.datetime({ offset: true }).optional() })
  .refine((q) => !q.from || !q.to || Date.parse(q.from) < Date.parse(q.to), { message: 'from must be before to', path: ['to'] })
  .refine((q) => !q.from || !q.to || Date.parse(q.to) - Date.parse(q.from) <= 7 * 86_400_000, { message: 'at most 7 days', path: ['from'] });
export const alarmSummaryOut = z.object({
  plantId: z.number().int(),
  from: z.iso.datetime(),
  to: z.iso.datetime(),
  bucket_min: z.number().int(),
  /** A bucket with more annunciated alarms than this is a flood (setting alarm.flood_per_10min). */
  floodThreshold: z.number().int(),
  buckets: z.array(z.object({ from: z.iso.datetime(), raised: z.number().int(), suppressed: z.number().int(), flood: z.boolean() })),
  floodBuckets: z.number().int(),
});
export type AlarmSummaryOut = z.infer<typeof alarmSummaryOut>;
