import { and, asc, desc, eq, getTableColumns, gte, inArray, lt, sql, type SQL } from 'drizzle-orm';
import type pg from 'pg';
import type { Db } from '../db/client.ts';
import { alarms, balances, plants, tags } from '../db/schema/index.ts';
import { versionAt } from '../../shared/domain/geometry-versions.ts';
import { plantModelRepository } from './plant-model.repository.ts';

export type PlantRow = typeof plants.$inferSelect;
export type AlarmRow = typeof alarms.$inferSelect;
export type BalanceRow = typeof balances.$inferSelect;

/**
 * One tag of the live list, positional as PostgreSQL's json_agg built it: id, name, description,
 * unit, enabled, expectedPeriod_s, source id, source name, source kind, latest ts (epoch ms) or
 * null, latest value, latest quality, and the tag's signals as [signal, targetType, targetId,
 * targetCode] (targetCode null when the target is not part of this plant's layout).
 */
export type LiveTagRow = [
  id: number,
  name: string,
  description: string,
  unit: string,
  enabled: boolean,
  expectedPeriod_s: number,
  sourceId: number,
  sourceName: string,
  sourceKind: 'mqtt' | 'opcua',
  ts_ms: number | null,
  value: number | null,
  quality: number | null,
  signals: Array<[signal: string, targetType: 'plant' | 'train' | 'basin' | 'clarifier' | 'pump', targetId: number, targetCode: string | null]>,
];

/**
 * The live tag list in one statement and one JSON value: tags with their source, latest value
 * and signals, the signal targets' codes resolved within the plant. The list is read on every
 * refresh of the monitor's tag views (301 tags in bench:api); one round trip and one JSON.parse
 * replace six queries, a row object and a Date per tag.
 */
const LIVE_TAGS = `SELECT coalesce(json_agg(json_build_array(t.id, t.name, t.description, t.unit, t.enabled, t.expected_period_s,
      s.id, s.name, s.kind, (extract(epoch FROM l.ts) * 1000)::float8, l.value, l.quality, coalesce(sig.list, '[]'::json)) ORDER BY t.name), '[]'::json) AS rows
  FROM tags t
  JOIN sources s ON s.id = t.source_id
  LEFT JOIN tag_latest l ON l.tag_id = t.id
  LEFT JOIN LATERAL (
    SELECT json_agg(json_build_array(m.signal, m.target_type, m.target_id,
      CASE m.target_type
        WHEN 'plant' THEN (SELECT p.code FROM plants p WHERE p.id = m.target_id AND p.id = $1)
        WHEN 'train' THEN (SELECT tr.code FROM trains tr WHERE tr.id = m.target_id AND tr.plant_id = $1)
        WHEN 'basin' THEN (SELECT b.code FROM basins b JOIN trains tr ON tr.id = b.train_id WHERE b.id = m.target_id AND tr.plant_id = $1)
        WHEN 'clarifier' THEN (SELECT c.code FROM clarifiers c JOIN trains tr ON tr.id = c.train_id WHERE c.id = m.target_id AND tr.plant_id = $1)
        WHEN 'pump' THEN (SELECT x.code FROM pumps x JOIN trains tr ON tr.id = x.train_id WHERE x.id = m.target_id AND tr.plant_id = $1)
      END) ORDER BY m.signal) AS list
    FROM signal_map m WHERE m.plant_id = $1 AND m.tag_id = t.id
  ) sig ON true
  WHERE t.plant_id = $1`;

export interface BalanceBucketRow {
  bucket: Date;
  id: number;
  ts: Date;
  quality: 'good' | 'estimated' | 'unavailable';
  data: Record<string, unknown>;
  computations: number;
  worst: number;
}

const BALANCE_BUCKETS = `WITH x AS (
    SELECT date_bin(make_interval(secs => $4::float8), ts, timestamptz 'epoch') AS bucket, id, ts, quality, data
    FROM balances WHERE plant_id = $1 AND ts >= $2 AND ts < $3
  )
  SELECT DISTINCT ON (bucket) bucket, id, ts, quality, data,
    count(*) OVER w AS computations,
    max(CASE quality WHEN 'good' THEN 0 WHEN 'estimated' THEN 1 ELSE 2 END) OVER w AS worst
  FROM x WINDOW w AS (PARTITION BY bucket)
  ORDER BY bucket, ts DESC, id DESC
  LIMIT $5`;

/** Plants, their layout, live tag values, balances and alarms (reads only). */
export function plantRepository(db: Db, pool: pg.Pool) {
  return {
    list(scope: number[] | null): Promise<PlantRow[]> {
      const q = db.select().from(plants);
      return (scope ? q.where(inArray(plants.id, scope)) : q).orderBy(asc(plants.id));
    },
    async byId(id: number): Promise<PlantRow | undefined> {
      const [p] = await db.select().from(plants).where(eq(plants.id, id));
      return p;
    },
    async byCode(code: string): Promise<PlantRow | undefined> {
      const [p] = await db.select().from(plants).where(eq(plants.code, code));
      return p;
    },
    /**
     * Every train and unit with the geometry that holds now (effective-dated versions, see
     * plant-model.repository.ts); units out of service now carry inService: false.
     */
    async layout(plantId: number, at: Date = new Date()) {
      const m = await plantModelRepository(db).model(plantId);
      const now = <G extends { inService: boolean }>(versions: Array<G & { effectiveFrom: Date }>) => versionAt(versions, at);
      return {
        trains: m.trains,
        basins: m.basins.map((b) => {
          const v = now(b.versions);
          return { id: b.id, trainId: b.trainId, code: b.code, name: b.name, volume_m3: v?.volume_m3 ?? 0, aeratedFraction: v?.aeratedFraction ?? 0, sideWaterDepth_m: v?.sideWaterDepth_m ?? null, inService: v?.inService ?? false };
        }),
        clarifiers: m.clarifiers.map((c) => {
          const v = now(c.versions);
          return { id: c.id, trainId: c.trainId, code: c.code, name: c.name, area_m2: v?.area_m2 ?? 0, sideWaterDepth_m: v?.sideWaterDepth_m ?? 0, feedDepth_m: v?.feedDepth_m ?? null, count: v?.count ?? 1, inService: v?.inService ?? false };
        }),
        pumps: m.pumps.map((x) => {
          const v = now(x.versions);
          return { id: x.id, trainId: x.trainId, code: x.code, name: x.name, kind: x.kind, clarifierId: x.clarifierId, capacity_m3h: v?.capacity_m3h ?? 0, inService: v?.inService ?? false };
        }),
      };
    },
    async liveTags(plantId: number): Promise<LiveTagRow[]> {
      const r = await pool.query<{ rows: LiveTagRow[] }>({ name: 'plant_live_tags', text: LIVE_TAGS, values: [plantId] });
      return r.rows[0]?.rows ?? [];
    },
    async tag(plantId: number, tagId: number): Promise<{ id: number; unit: string; expectedPeriod_s: number } | undefined> {
      const [t] = await db.select({ id: tags.id, unit: tags.unit, expectedPeriod_s: tags.expectedPeriod_s }).from(tags).where(and(eq(tags.id, tagId), eq(tags.plantId, plantId)));
      return t;
    },
    /** Latest values changed since `sinceMs` (by received time), for the stream's poll of tag_latest. */
    async latestChangedSince(plantId: number, since: Date): Promise<Array<{ tagId: number; ts: Date; value: number | null; quality: number; receivedAt: Date }>> {
      const r = await pool.query({
        name: 'stream_tag_latest_since',
        text: `SELECT l.tag_id AS "tagId", l.ts, l.value, l.quality, l.received_at AS "receivedAt"
          FROM tag_latest l JOIN tags t ON t.id = l.tag_id
          WHERE t.plant_id = $1 AND l.received_at > $2 ORDER BY l.received_at`,
        values: [plantId, since],
      });
      return r.rows;
    },
    async latestBalance(plantId: number): Promise<BalanceRow | undefined> {
      const [b] = await db.select().from(balances).where(eq(balances.plantId, plantId)).orderBy(desc(balances.ts), desc(balances.id)).limit(1);
      return b;
    },
    async balanceBuckets(plantId: number, from: Date, to: Date, step_s: number, limit: number): Promise<BalanceBucketRow[]> {
      const r = await pool.query<BalanceBucketRow>({ name: 'balance_buckets', text: BALANCE_BUCKETS, values: [plantId, from, to, step_s, limit] });
      return r.rows;
    },
    /**
     * Alarms newest raised first; `before` = (raisedAt, id) of the last row of the previous page,
     * raisedAt as PostgreSQL's own text (`cursorTs`) so microseconds survive the round trip.
     */
    alarms(plantId: number, f: { state?: AlarmRow['state']; from?: Date; to?: Date; before?: { ts: string; id: number } }, limit: number): Promise<Array<AlarmRow & { cursorTs: string }>> {
      const conds: SQL[] = [eq(alarms.plantId, plantId)];
      if (f.state) conds.push(eq(alarms.state, f.state));
      if (f.from) conds.push(gte(alarms.raisedAt, f.from));
      if (f.to) conds.push(lt(alarms.raisedAt, f.to));
      if (f.before) conds.push(sql`(${alarms.raisedAt}, ${alarms.id}) < (${f.before.ts}::timestamptz, ${f.before.id}::int)`);
      return db
        .select({ ...getTableColumns(alarms), cursorTs: sql<string>`${alarms.raisedAt}::text` })
        .from(alarms)
        .where(and(...conds))
        .orderBy(desc(alarms.raisedAt), desc(alarms.id))
        .limit(limit);
    },
  };
}
export type PlantRepository = ReturnType<typeof plantRepository>;
