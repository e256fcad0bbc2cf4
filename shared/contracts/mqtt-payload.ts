import { z } from 'zod';

/**
 * Flocstream's own MQTT payload (documented in DEVELOPERS.md, "MQTT payloads").
 *
 * - single value: any topic, payload `{"v": 4.12, "ts": "2026-12-02T01:00:00.000Z", "q": "good"}`;
 *   `ts` and `q` are optional (receive time, good); `v` may be null only with `q` = "bad".
 * - batch: any topic, payload `{"samples": [{"topic": "kb/ab1/AIT-101", "v": 4.12, "ts": "…", "q": "good"}, …]}`;
 *   each item names the topic it would have been published on, so one topic → tag table serves both.
 * - plain number: payload `4.12` (text), timestamped on receipt, quality good.
 *
 * Validators return a result instead of throwing (hot path).
 */
export const payloadQuality = z.enum(['good', 'uncertain', 'bad']);

const finite = z.number().refine(Number.isFinite, 'must be a finite number');
const isoTs = z.iso.datetime({ offset: true });

/** The exact pattern zod checks `ts` against (ingest's fast path uses the same one). */
export const isoTimestampPattern: RegExp = isoTs._zod.pattern;

export const singleValuePayload = z
  .object({ v: finite.nullable(), ts: isoTs.optional(), q: payloadQuality.optional() })
  .strict()
  .refine((p) => p.v !== null || p.q === 'bad', { message: 'v may be null only when q is "bad"', path: ['v'] });

export const batchItem = z
  .object({ topic: z.string().min(1).max(512), v: finite.nullable(), ts: isoTs.optional(), q: payloadQuality.optional() })
  .strict()
  .refine((p) => p.v !== null || p.q === 'bad', { message: 'v may be null only when q is "bad"', path: ['v'] });

export const batchPayload = z.object({ samples: z.array(batchItem).min(1).max(100_000) }).strict();

export type SingleValuePayload = z.infer<typeof singleValuePayload>;
export type BatchItem = z.infer<typeof batchItem>;
export type BatchPayload = z.infer<typeof batchPayload>;
export type PayloadQuality = z.infer<typeof payloadQuality>;
