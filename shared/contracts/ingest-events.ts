import { z } from 'zod';

/**
 * Channel on which ingest workers and the database announce changes between ingest and the API
 * (PostgreSQL LISTEN/NOTIFY; a payload is delivered when its transaction commits, at most 8000
 * bytes). Payloads are the JSON text of one of `ingestEvent`:
 *
 * - `{"event":"wiring","table":"sources"|"tags"}` — sent by a trigger on every statement that
 *   writes `sources` or `tags` (migration 0005); each ingest worker re-reads its wiring at once.
 * - `{"event":"worker","workerId":"…","host":"…","state":"started"|"stopped"}` — an ingest worker
 *   wrote its first row in `ingest_workers`, or its last on a clean stop.
 * - `{"event":"discovery","workerId":"…","sourceId":7,"newTopics":3}` — a worker added topics
 *   to `mqtt_discovery` (counts of known topics change with every heartbeat and are not
 *   announced).
 *
 * A payload that does not parse is ignored by listeners (a newer sender may add events).
 */
export const INGEST_CHANNEL = 'flocstream_ingest';

export const ingestEvent = z.discriminatedUnion('event', [
  z.object({ event: z.literal('wiring'), table: z.string().optional() }),
  z.object({ event: z.literal('worker'), workerId: z.string(), host: z.string(), state: z.enum(['started', 'stopped']) }),
  z.object({ event: z.literal('discovery'), workerId: z.string(), sourceId: z.number().int(), newTopics: z.number().int() }),
]);
export type IngestEvent = z.infer<typeof ingestEvent>;

/** Parses a NOTIFY payload on INGEST_CHANNEL; null for anything else. */
export function parseIngestEvent(payload: string | undefined): IngestEvent | null {
  if (!payload) return null;
  let json: unknown;
  try {
    json = JSON.parse(payload);
  } catch {
    return null;
  }
  const r = ingestEvent.safeParse(json);
  return r.success ? r.data : null;
}
