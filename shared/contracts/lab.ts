import { z } from 'zod';
import { MLSS_RANGE_gL, settleabilityIssues } from '../domain/settleability.js';

/**
 * Lab results (`/api/v1/plants/:plantId/lab-results`): the daily settleability test (SVI, DSVI,
 * SSVI) and lab MLSS / TSS, entered by form (JSON) or uploaded as CSV (RFC 4180, header row,
 * the same field names as the JSON form).
 *
 * Units are fixed per kind and never converted: SVI, DSVI and SSVI in mL/g (computed by the
 * server from the test readings), MLSS in g/L, TSS in mg/L (the usual lab unit for suspended
 * solids; Standard Methods 2540 D). A reading outside its bound is refused (422), not clamped;
 * the settleability rules (e.g. "dilute and repeat" above 250 mL/L) are the shared ones of
 * shared/domain/settleability.ts, and implausible results are refused with the reason (MLSS outside
 * 0.1–20 g/L, settled volume over 1000 mL/L, an SVI-family index outside 20–1000 mL/g). `sampledAt` may not lie in the future (60 s allowed for
 * clock differences between the lab PC and the server).
 */

export const LAB_KINDS = ['SVI', 'DSVI', 'SSVI', 'MLSS', 'TSS'] as const;
export type LabKind = (typeof LAB_KINDS)[number];
export const LAB_UNITS: Record<LabKind, string> = { SVI: 'mL/g', DSVI: 'mL/g', SSVI: 'mL/g', MLSS: 'g/L', TSS: 'mg/L' };
/** Clock difference tolerated for "not in the future" [ms]. */
export const FUTURE_TOLERANCE_MS = 60_000;

const num = (description: string) => z.number().meta({ description });
const locationCode = z
  .string()
  .regex(/^[a-z0-9][a-z0-9_-]{0,31}$/, 'a basin or clarifier code of the plant (lower-case letters, digits, - or _)')
  .meta({ description: 'basin or clarifier code the sample was taken from' });

const common = {
  sampledAt: z.iso
    .datetime({ offset: true, message: 'an ISO 8601 date-time with time zone, e.g. 2025-03-01T07:30:00Z' })
    .refine((s) => Date.parse(s) <= Date.now() + FUTURE_TOLERANCE_MS, { message: 'sampledAt lies in the future' })
    .meta({ description: 'when the sample was taken (ISO 8601)' }),
  location: locationCode.optional(),
  note: z.string().max(500).optional().meta({ description: 'free text, e.g. who ran the test' }),
};

const mlss = num('MLSS of the (undiluted) sample [g/L]').min(MLSS_RANGE_gL.min).max(MLSS_RANGE_gL.max);
const settleability = (kind: 'SVI' | 'DSVI' | 'SSVI', description: string) =>
  z
    .object({
      kind: z.literal(kind),
      settledVolume_mLL: num('settled volume after 30 min in a 1 L cylinder [mL/L] (of the diluted sample for a DSVI)').positive().max(1000),
      mlss_gL: mlss,
      dilutionFactor: num('dilution factor ≥ 1 (total volume / sludge volume); DSVI only').min(1).max(100).optional(),
      ...common,
    })
    .strict()
    .meta({ description });

export const labResultInput = z
  .discriminatedUnion('kind', [
    settleability('SVI', 'sludge volume index, undiluted (Standard Methods 2710 D)'),
    settleability('DSVI', 'diluted SVI (Jenkins, Richard & Daigger 1993)'),
    settleability('SSVI', 'stirred SVI at 3.5 g/L (White 1975)'),
    z.object({ kind: z.literal('MLSS'), mlss_gL: mlss, ...common }).strict(),
    z.object({ kind: z.literal('TSS'), tss_mgL: num('total suspended solids [mg/L]').min(0).max(50_000), ...common }).strict(),
  ])
  .superRefine((r, ctx) => {
    // Range issues are reported by the field schemas; add only the test rules, under their field.
    if (r.kind === 'SVI' || r.kind === 'DSVI' || r.kind === 'SSVI') {
      for (const issue of settleabilityIssues(r)) if (!issue.range) ctx.addIssue({ code: 'custom', message: issue.message, path: [issue.field] });
    }
  })
  .meta({ id: 'LabResultInput', description: 'one lab result; the fields depend on kind' });
export type LabResultInput = z.infer<typeof labResultInput>;

/** CSV upload columns (header row required; order free; empty cell = field left out). */
export const LAB_CSV_COLUMNS = ['kind', 'sampledAt', 'location', 'settledVolume_mLL', 'mlss_gL', 'dilutionFactor', 'tss_mgL', 'note'] as const;
export const LAB_CSV_NUMERIC: ReadonlySet<string> = new Set(['settledVolume_mLL', 'mlss_gL', 'dilutionFactor', 'tss_mgL']);
/** Most rows one upload may carry. */
export const LAB_CSV_MAX_ROWS = 5000;

export const labResultOut = z
  .object({
    id: z.number().int(),
    plantId: z.number().int(),
    kind: z.enum(LAB_KINDS),
    value: z.number().meta({ description: 'the result in unit' }),
    unit: z.string().meta({ description: 'mL/g (SVI, DSVI, SSVI), g/L (MLSS), mg/L (TSS)' }),
    location: z.string().nullable(),
    sampledAt: z.string().meta({ description: 'ISO 8601' }),
    details: z.record(z.string(), z.unknown()).meta({ description: 'test readings as entered (settledVolume_mLL, mlss_gL, dilutionFactor, note)' }),
    flags: z.array(z.string()).meta({ description: 'why a result is estimated (e.g. SSVI not at 3.5 g/L); never silently corrected' }),
    enteredBy: z.number().int().nullable(),
    createdAt: z.string(),
  })
  .meta({ id: 'LabResult' });
export type LabResultOut = z.infer<typeof labResultOut>;

export const labResultsQuery = z
  .object({
    kind: z.enum(LAB_KINDS).optional(),
    location: locationCode.optional(),
    from: z.iso.datetime({ offset: true }).optional().meta({ description: 'sampled at or after (ISO 8601)' }),
    to: z.iso.datetime({ offset: true }).optional().meta({ description: 'sampled before (ISO 8601)' }),
    cursor: z.string().max(512).optional().meta({ description: 'opaque cursor from nextCursor' }),
    limit: z.coerce.number().int().min(1).max(10_000).optional().meta({ description: 'rows per page (default 500)' }),
    format: z.enum(['json', 'csv']).optional(),
  })
  .strict();
export type LabResultsQuery = z.infer<typeof labResultsQuery>;

export const labResultsResponse = z
  .object({ plantId: z.number().int(), results: z.array(labResultOut).meta({ description: 'newest sample first' }), nextCursor: z.string().nullable() })
  .meta({ id: 'LabResults' });

export const labImportResponse = z
  .object({ imported: z.number().int(), results: z.array(labResultOut) })
  .meta({ id: 'LabImport', description: 'every row was valid and stored' });
