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
});
export type AlarmOut = z.infer<typeof alarmOut>;

export const alarmAckParams = z.strictObject({ plantId: z.coerce.number().int().positive(), alarmId: z.coerce.number().int().positive() });
export const alarmAckRequest = z.strictObject({ comment: z.string().max(500).optional() });
