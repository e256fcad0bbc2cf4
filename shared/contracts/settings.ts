import { z } from 'zod';
import { SETTLING_CORRELATIONS, type SettlingCorrelationId } from '../domain/settling.js';

/**
 * Every setting the balance engine, the alarms and the mailer read, with its schema, default,
 * unit and where the default comes from. Settings live in the `settings` table: plantId 0 holds
 * the global values, a plant's own row overrides them, and a key with no row takes the default
 * below. Defaults marked [CP] are rules of thumb, common practice of the trade (REFERENCES.md);
 * [ours] are Flocstream's own starting values with no published source — a plant should set them.
 */
const pos = z.number().positive();
const frac = z.number().min(0).max(1);
const secs = z.number().int().min(1).max(86_400);

export const SETTINGS = {
  'balance.interval_s': { schema: z.number().int().min(1).max(3600), default: 10, unit: 's', doc: 'Balance computation interval per plant [ours]' },
  'inputs.stale_factor': { schema: z.number().min(1).max(100), default: 3, unit: '-', doc: 'A tag is stale when its age exceeds this many expected periods [ours]' },
  'inputs.max_age_s': { schema: secs, default: 900, unit: 's', doc: 'Older than this, a stale value is no longer used at all (unavailable) [ours]' },
  'svi.max_age_d': { schema: pos.max(365), default: 7, unit: 'd', doc: 'An SVI older than this makes the RAS and storm figures estimated [ours]' },
  'srt.target_d': { schema: pos.max(100), default: 10, unit: 'd', doc: 'Target total SRT for the WAS advice and the SRT alarm [ours; plants set their own]' },
  'srt.window_h': { schema: z.number().min(1).max(168), default: 24, unit: 'h', doc: 'Rolling SRT window (design §3 item 5)' },
  'storm.peak_flow_factor': { schema: z.number().min(1).max(10), default: 2, unit: '-', doc: 'Storm flow = factor × 24 h mean influent when the plant has no peak_flow_m3h [ours]' },
  'storm.min_mlss_gL': { schema: pos, default: 2, unit: 'g/L', doc: 'Lowest basin MLSS during storm storage [CP]' },
  'storm.max_stored_fraction': { schema: frac, default: 0.3, unit: '-', doc: 'Highest fraction of the inventory in the clarifiers [CP]' },
  'storm.max_blanket_rise_m': { schema: pos, default: 0.3, unit: 'm', doc: 'Highest blanket rise during storage [CP]' },
  'storm.hydrograph': {
    schema: z
      .array(z.strictObject({ t_h: z.number().min(0).max(168), peakFraction: z.number().min(0).max(1) }))
      .min(2)
      .max(200)
      .refine((h) => h.every((p, i) => i === 0 || p.t_h >= h[i - 1]!.t_h) && h[h.length - 1]!.t_h > h[0]!.t_h, 'times must not decrease and must span some time'),
    default: [
      { t_h: 0, peakFraction: 1 },
      { t_h: 6, peakFraction: 1 },
      { t_h: 6, peakFraction: 0 },
      { t_h: 12, peakFraction: 0 },
    ] as { t_h: number; peakFraction: number }[],
    unit: 'h, -',
    doc: 'Design storm of the storm timeline: flow = present + peakFraction × (storm peak − present), linear between points, a repeated time is a step; default a step to the peak for 6 h, then 6 h back at the present flow [ours]',
  },
  'ras.xr_factor': { schema: z.number().min(100).max(5000), default: 1200, unit: 'mL/L', doc: 'X_R,max = factor / SVI (1000 mL/L with about 20 % margin) [CP]' },
  'settling.correlation': { schema: z.enum(SETTLING_CORRELATIONS), default: 'haertel-poepel-1992' as SettlingCorrelationId, unit: '', doc: 'SVI → Vesilind correlation of the live state point when no fit to the plant\'s own data is used (shared/domain/settling.ts); Härtel & Pöpel (1992) is the one whose coefficients are not from memory' },
  'settling.fit_min_points': { schema: z.number().int().min(3).max(1000), default: 10, unit: '-', doc: 'The live state point uses the Vesilind fit to the plant\'s own settleability tests from this many tests on, the correlation below it [ours]' },
  'settling.fit_window_d': { schema: z.number().min(1).max(730), default: 90, unit: 'd', doc: 'Settleability tests of this many days back enter the Vesilind fit [ours]' },
  'settling.operating_fit_min_points': { schema: z.number().int().min(3).max(10_000), default: 24, unit: '-', doc: 'Without enough lab tests, the live state point uses the Vesilind fit to the plant\'s stable-blanket hours (limiting flux, Keinath et al. 1977) from this many hours on, the correlation below it [ours: a day of such hours]' },
  'settling.operating_window_d': { schema: z.number().min(1).max(365), default: 30, unit: 'd', doc: 'Stable-blanket hours of this many days back (before the plant clock) enter the operating Vesilind fit; the engine reads back one chunk of history per balance until the window is covered, then one new hour at a time [ours]' },
  'settling.cylinder_height_m': { schema: z.number().min(0.1).max(1), default: 0.35, unit: 'm', doc: 'Height of the 1 L mark of the SVI cylinder, for the 30-min mean settling velocity of a test [M: about 0.35 m for a 1 L graduated cylinder; measure yours]' },
  'clarifier.blanket_conc_method': { schema: z.enum(['ras', 'mean']), default: 'ras' as 'ras' | 'mean', unit: '', doc: "Blanket concentration: 'ras' = underflow TSS, 'mean' = (MLSS + underflow TSS)/2 (shared/domain/clarifier-inventory.ts)" },
  'clarifier.integral_window_h': { schema: z.number().min(0.1).max(24), default: 1, unit: 'h', doc: 'Window of the clarifier mass-balance integral shown beside the blanket mass [ours]' },
  'alarm.on_delay_s': { schema: z.number().int().min(0).max(3600), default: 60, unit: 's', doc: 'A condition must hold this long before the alarm is raised (ISA-18.2 on-delay) [ours]' },
  'alarm.mlss_floor_gL': { schema: pos, default: 2, unit: 'g/L', doc: 'Basin MLSS floor [CP, the storm-storage rule of thumb]' },
  'alarm.mlss_deadband_gL': { schema: z.number().min(0), default: 0.1, unit: 'g/L', doc: 'Deadband of the MLSS floor alarm [ours]' },
  'alarm.stored_fraction_max': { schema: frac, default: 0.3, unit: '-', doc: 'Stored fraction in the clarifiers [CP]' },
  'alarm.stored_fraction_deadband': { schema: frac, default: 0.02, unit: '-', doc: 'Deadband of the stored-fraction alarm [ours]' },
  'alarm.blanket_max_fraction_swd': { schema: frac, default: 0.5, unit: '-', doc: 'Blanket level limit as a fraction of the side-water depth [ours]' },
  'alarm.blanket_deadband_m': { schema: z.number().min(0), default: 0.05, unit: 'm', doc: 'Deadband of the blanket level alarm [ours]' },
  'alarm.blanket_rate_max_m_h': { schema: pos, default: 0.3, unit: 'm/h', doc: 'Blanket rise-rate limit [ours, scaled from the 0.3 m storage rule of thumb]' },
  'alarm.blanket_rate_deadband_m_h': { schema: z.number().min(0), default: 0.05, unit: 'm/h', doc: 'Deadband of the blanket rise-rate alarm [ours]' },
  'alarm.blanket_rate_window_min': { schema: z.number().int().min(5).max(240), default: 30, unit: 'min', doc: 'Window of the blanket rise-rate fit [ours]' },
  'alarm.ras_margin_min': { schema: z.number().min(-1).max(1), default: 0.1, unit: '-', doc: 'RAS concentration and pump margin threshold [ours]' },
  'alarm.ras_margin_deadband': { schema: frac, default: 0.02, unit: '-', doc: 'Deadband of the RAS margin alarms [ours]' },
  'alarm.srt_tolerance': { schema: frac, default: 0.2, unit: '-', doc: 'SRT off target when |SRT − target| > tolerance × target [ours]' },
  'alarm.srt_deadband': { schema: frac, default: 0.05, unit: '-', doc: 'Deadband of the SRT alarm, fraction of the target [ours]' },
  'alarm.start_suppression_periods': { schema: z.number().min(0).max(1000), default: 6, unit: '-', doc: 'ISA-18.2 designed suppression: a tag-stale alarm is suppressed (listed, not annunciated) for this many expected periods of the tag after ingest\'s worker started or the tag\'s source connected, while the source catches up [ours]' },
  'alarm.start_suppression_min_s': { schema: z.number().int().min(0).max(86_400), default: 180, unit: 's', doc: 'The start suppression of tag-stale alarms lasts at least this long [ours]' },
  'alarm.flood_per_10min': { schema: z.number().int().min(1).max(1000), default: 10, unit: 'alarms', doc: 'Alarm flood: more than this many alarms annunciated in 10 minutes (for one operator). ANSI/ISA-18.2-2016 gives "more than 10 alarms per 10 minutes" as its example of a flood, as EEMUA 191 does [M: from memory]' },
  'alarm.ingest_down_s': { schema: secs, default: 120, unit: 's', doc: 'Ingest down when no tag of the plant was received for this long [ours]' },
  'mail.recipients': { schema: z.array(z.email()).max(50), default: [] as string[], unit: '', doc: 'Who gets alarm e-mails and the shift summary' },
  'mail.min_priority': { schema: z.number().int().min(1).max(4), default: 2, unit: '', doc: 'Alarm e-mails for priorities 1 … this value (1 highest) [ours]' },
  'mail.from': { schema: z.email(), default: 'flocstream@localhost.invalid', unit: '', doc: 'Sender address' },
  'mail.catcher_port': { schema: z.number().int().min(0).max(65535), default: 18825, unit: '', doc: 'Port of the built-in SMTP catcher on 127.0.0.1 (used when SMTP_URL is not set; global only; read at start)' },
  'mail.summary_cron': { schema: z.string().regex(/^(\S+\s+){4}\S+$/, 'five cron fields'), default: '0 6 * * *', unit: '', doc: 'Daily shift summary, cron in the plant time zone' },
} as const;

export type SettingKey = keyof typeof SETTINGS;
export type EffectiveSettings = { [K in SettingKey]: z.infer<(typeof SETTINGS)[K]['schema']> };

export const SETTING_KEYS = Object.keys(SETTINGS) as SettingKey[];
export const settingKey = z.enum(SETTING_KEYS as [SettingKey, ...SettingKey[]]);

/** The defaults as one object. */
export function defaultSettings(): EffectiveSettings {
  const out = {} as Record<string, unknown>;
  for (const k of SETTING_KEYS) {
    const d = SETTINGS[k].default;
    out[k] = Array.isArray(d) ? [...d] : d;
  }
  return out as EffectiveSettings;
}

export const settingsQuery = z.strictObject({ plantId: z.coerce.number().int().min(0).default(0) });

/** PUT /settings: values to store for a plant (0 = global); null removes the override. */
export const putSettingsRequest = z
  .strictObject({
    plantId: z.number().int().min(0).default(0),
    values: z.record(z.string(), z.unknown()),
  })
  .superRefine((v, ctx) => {
    for (const [k, val] of Object.entries(v.values)) {
      if (!(k in SETTINGS)) {
        ctx.addIssue({ code: 'custom', path: ['values', k], message: 'no such setting' });
        continue;
      }
      if (val === null) continue;
      const r = SETTINGS[k as SettingKey].schema.safeParse(val);
      if (!r.success) ctx.addIssue({ code: 'custom', path: ['values', k], message: r.error.issues.map((i) => i.message).join('; ') });
    }
    if (v.plantId !== 0 && 'mail.catcher_port' in v.values) ctx.addIssue({ code: 'custom', path: ['values', 'mail.catcher_port'], message: 'global only (plantId 0)' });
  });
export type PutSettingsRequest = z.infer<typeof putSettingsRequest>;

export const settingOut = z.object({
  key: settingKey,
  value: z.unknown(),
  default: z.unknown(),
  source: z.enum(['default', 'global', 'plant']),
  unit: z.string(),
  doc: z.string(),
});
export const settingsOut = z.object({ plantId: z.number().int(), settings: z.array(settingOut) });
export type SettingsOut = z.infer<typeof settingsOut>;
