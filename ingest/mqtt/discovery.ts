import type pg from 'pg';

/** A topic's news since the last drain, as upserted into `mqtt_discovery`. */
export interface DiscoveryDelta {
  topic: string;
  /** First 256 characters of the last payload. */
  lastPayload: string;
  firstSeen: number;
  lastSeen: number;
  /** Messages since the last drain (added to the row's count, so workers sum up). */
  count: number;
  tagId: number | null;
}

const MAX_TOPICS = 5_000;
export const PAYLOAD_PREVIEW = 256;

interface Entry {
  last: unknown;
  firstSeen: number;
  lastSeen: number;
  pending: number;
  tagId: number | null;
}

/**
 * Topics seen on one source since they were last saved, bounded so a topic storm cannot exhaust
 * memory: beyond MAX_TOPICS new topics are only counted (`overflow`). The MQTT connector calls
 * `see` per message (cheap: no stringification); the ingest service drains it into the
 * `mqtt_discovery` table with each heartbeat (`saveDiscovery`).
 */
export class Discovery {
  private topics = new Map<string, Entry>();
  private dirty = new Set<string>();
  overflow = 0;

  /** `payload` is a Buffer, a string or a decoded item (stringified only when drained, off the hot path). */
  see(topic: string, payload: unknown, tagId: number | null, now: number): void {
    const e = this.topics.get(topic);
    if (e) {
      e.last = payload;
      e.lastSeen = now;
      e.pending++;
      e.tagId = tagId;
      this.dirty.add(topic);
      return;
    }
    if (this.topics.size >= MAX_TOPICS) {
      this.overflow++;
      return;
    }
    this.topics.set(topic, { last: payload, firstSeen: now, lastSeen: now, pending: 1, tagId });
    this.dirty.add(topic);
  }

  /** The topics seen since the last drain, with their message counts; resets those counts. */
  drain(): DiscoveryDelta[] {
    const out: DiscoveryDelta[] = [];
    for (const topic of this.dirty) {
      const e = this.topics.get(topic)!;
      out.push({ topic, lastPayload: preview(e.last).slice(0, PAYLOAD_PREVIEW), firstSeen: e.firstSeen, lastSeen: e.lastSeen, count: e.pending, tagId: e.tagId });
      e.pending = 0;
    }
    this.dirty.clear();
    return out;
  }

  /** Puts back what a failed save drained, so the next save carries it (counts are not lost). */
  restore(deltas: readonly DiscoveryDelta[]): void {
    for (const d of deltas) {
      const e = this.topics.get(d.topic);
      if (!e) continue;
      e.pending += d.count;
      this.dirty.add(d.topic);
    }
  }

  get size(): number {
    return this.topics.size;
  }
}

function preview(p: unknown): string {
  if (Buffer.isBuffer(p)) return p.subarray(0, PAYLOAD_PREVIEW * 4).toString('utf8');
  if (typeof p === 'string') return p;
  return JSON.stringify(p) ?? '';
}

/**
 * Upserts one source's drained topics into `mqtt_discovery` in one statement (arrays through
 * unnest). A row's count grows by the delta, its last payload and last-seen time follow the
 * newest report (so two workers on one source never move it back). Rows of a source deleted
 * in the meantime are skipped rather than failing the batch. Returns the number of topics new
 * to the table.
 */
export async function saveDiscovery(db: pg.Pool, sourceId: number, deltas: readonly DiscoveryDelta[]): Promise<number> {
  if (!deltas.length) return 0;
  const r = await db.query<{ inserted: boolean }>(
    `INSERT INTO mqtt_discovery AS d (source_id, topic, last_payload, first_seen, last_seen, count, tag_id)
     SELECT $1, u.topic, u.payload, to_timestamp(u.first_ms / 1000.0), to_timestamp(u.last_ms / 1000.0), u.n, u.tag_id
     FROM unnest($2::text[], $3::text[], $4::float8[], $5::float8[], $6::bigint[], $7::int[]) AS u(topic, payload, first_ms, last_ms, n, tag_id)
     WHERE EXISTS (SELECT 1 FROM sources s WHERE s.id = $1)
     ON CONFLICT (source_id, topic) DO UPDATE SET
       count = d.count + excluded.count,
       first_seen = least(d.first_seen, excluded.first_seen),
       last_payload = CASE WHEN excluded.last_seen >= d.last_seen THEN excluded.last_payload ELSE d.last_payload END,
       tag_id = CASE WHEN excluded.last_seen >= d.last_seen THEN excluded.tag_id ELSE d.tag_id END,
       last_seen = greatest(d.last_seen, excluded.last_seen)
     RETURNING (xmax = 0) AS inserted`,
    [
      sourceId,
      deltas.map((d) => d.topic),
      // PostgreSQL text cannot hold NUL; a binary payload's preview would fail the whole batch.
      deltas.map((d) => d.lastPayload.replaceAll('\u0000', '\uFFFD')),
      deltas.map((d) => d.firstSeen),
      deltas.map((d) => d.lastSeen),
      deltas.map((d) => d.count),
      deltas.map((d) => d.tagId),
    ],
  );
  return r.rows.filter((x) => x.inserted).length;
}

/** Forgets topics no worker has seen for `days` (a renamed device's old topics leave the list). */
export async function pruneDiscovery(db: pg.Pool, days: number): Promise<number> {
  const r = await db.query(`DELETE FROM mqtt_discovery WHERE last_seen < now() - make_interval(days => $1)`, [days]);
  return r.rowCount ?? 0;
}
