import type pg from 'pg';
import type { SourceConfig } from './connector.ts';
import type { TagConfig } from './pipeline/types.ts';

export interface WiringSnapshot {
  sources: SourceConfig[];
  tagsBySource: Map<number, TagConfig[]>;
}

/** Reads the enabled sources and their enabled tags (the only tables ingest reads). */
export async function loadWiring(pool: pg.Pool): Promise<WiringSnapshot> {
  const s = await pool.query<{ id: number; name: string; kind: 'mqtt' | 'opcua'; url: string; username: string | null; secret: string | null; options: Record<string, unknown> }>(
    `SELECT id, name, kind, url, username, secret, options FROM sources WHERE enabled ORDER BY id`,
  );
  const t = await pool.query<{
    id: number;
    source_id: number;
    address: string;
    scale_gain: number;
    scale_offset: number;
    deadband: number;
    expected_period_s: number;
    range_low: number | null;
    range_high: number | null;
    sampling_interval_ms: number | null;
    kind: 'analog' | 'state' | 'counter';
  }>(
    `SELECT t.id, t.source_id, t.address, t.scale_gain, t.scale_offset, t.deadband, t.expected_period_s, t.range_low, t.range_high, t.sampling_interval_ms, t.kind
     FROM tags t JOIN sources s ON s.id = t.source_id WHERE t.enabled AND s.enabled ORDER BY t.id`,
  );
  const tagsBySource = new Map<number, TagConfig[]>();
  for (const r of t.rows) {
    const list = tagsBySource.get(r.source_id) ?? [];
    list.push({
      id: r.id,
      sourceId: r.source_id,
      address: r.address,
      scaleGain: r.scale_gain,
      scaleOffset: r.scale_offset,
      deadband: r.deadband,
      expectedPeriod_s: r.expected_period_s,
      rangeLow: r.range_low,
      rangeHigh: r.range_high,
      samplingInterval_ms: r.sampling_interval_ms,
      kind: r.kind,
    });
    tagsBySource.set(r.source_id, list);
  }
  return { sources: s.rows.map((r) => ({ ...r, options: r.options ?? {} })), tagsBySource };
}

/**
 * The source timestamp of the newest stored sample of each of these tags (`tag_latest`, kept by
 * the writer in the batch's transaction), for a source taken over from another worker.
 */
export async function lastStoredTimes(pool: pg.Pool, tagIds: readonly number[]): Promise<Map<number, Date>> {
  if (!tagIds.length) return new Map();
  const r = await pool.query<{ tag_id: number; ts: Date }>(`SELECT tag_id, ts FROM tag_latest WHERE tag_id = ANY($1)`, [tagIds]);
  return new Map(r.rows.map((x) => [x.tag_id, x.ts]));
}
