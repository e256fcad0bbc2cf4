import { z } from 'zod';

/**
 * Historian import (`POST /api/v1/plants/:plantId/history`) and its job (`GET /api/v1/jobs/:jobId`).
 *
 * The body is the CSV file itself (`Content-Type: text/csv` or `application/octet-stream`),
 * streamed to disk by the server; the options travel in the query string. Layouts:
 * - long: header `tag,ts,value[,quality]`, one sample per line;
 * - wide: header `ts,<tag>,<tag>,…`, one time per line, an empty cell is no sample.
 * A tag column may name its unit in brackets (`FIT-101 [gpm]`, or in the long layout's tag
 * field); the value is converted to the tag's own unit through shared/domain/units.ts.
 * Timestamps are ISO 8601 (an ISO time without an offset is read in `timezone`), or follow
 * `tsFormat` (tokens YYYY MM DD HH mm ss SSS, or `epoch_s` / `epoch_ms`) in `timezone`.
 */

/** Most problems a job lists; `rejected` still counts every refused line. */
export const HISTORY_MAX_ERRORS = 1000;

const timezone = z
  .string()
  .min(1)
  .max(64)
  .refine((tz) => {
    try {
      new Intl.DateTimeFormat('en-US', { timeZone: tz });
      return true;
    } catch {
      return false;
    }
  }, 'unknown IANA time zone')
  .meta({ description: 'IANA time zone of timestamps without an offset (default UTC)' });

const flag = z
  .union([z.boolean(), z.enum(['1', '0', 'true', 'false'])])
  .transform((v) => v === true || v === '1' || v === 'true');

export const historyImportQuery = z
  .object({
    layout: z.enum(['auto', 'long', 'wide']).default('auto').meta({ description: 'auto: long when the first header field is "tag"' }),
    tsFormat: z
      .string()
      .min(1)
      .max(64)
      .regex(/^(iso|epoch_s|epoch_ms|[YMDHms S:./\-T,]+)$/, 'iso, epoch_s, epoch_ms, or a pattern of YYYY MM DD HH mm ss SSS and separators')
      .default('iso'),
    timezone: timezone.default('UTC'),
    delimiter: z.enum([',', ';', '\t']).default(','),
    dryRun: flag.default(false).meta({ description: 'check every line, store nothing' }),
    balanceStep_s: z.coerce
      .number()
      .int()
      .min(1)
      .max(86_400)
      .optional()
      .meta({ description: 'step of the balance recompute over the window [s]; default the engine interval (balance.interval_s), never finer' }),
  })
  .strict();
export type HistoryImportQuery = z.output<typeof historyImportQuery>;

export const jobParams = z.object({ jobId: z.coerce.number().int().positive().max(2_147_483_647) }).strict();

export const historyImportAccepted = z.object({ jobId: z.number().int() });

export const historyRowError = z.object({
  line: z.number().int().meta({ description: 'line of the file, 1 = header' }),
  field: z.string(),
  message: z.string(),
});
export type HistoryRowError = z.infer<typeof historyRowError>;

export const historyJobOut = z.object({
  id: z.number().int(),
  plantId: z.number().int(),
  kind: z.enum(['import', 'recompute']),
  state: z.enum(['queued', 'running', 'done', 'failed']),
  progress: z.number().meta({ description: '0–1' }),
  rows: z.number().int().meta({ description: 'data lines read (import) or balances computed (recompute)' }),
  rejected: z.number().int(),
  errors: z.array(historyRowError),
  startedAt: z.string().nullable(),
  finishedAt: z.string().nullable(),
  dryRun: z.boolean(),
  /** Import: rows stored (0 for a dry run or a file already stored), window, the recompute job. */
  inserted: z.number().int().nullable(),
  from: z.string().nullable(),
  to: z.string().nullable(),
  recomputeJobId: z.number().int().nullable(),
  message: z.string().nullable(),
});
export type HistoryJobOut = z.infer<typeof historyJobOut>;
