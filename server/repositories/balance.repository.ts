import { and, desc, eq, isNull } from 'drizzle-orm';
import type { Balance } from '../../shared/contracts/balance.ts';
import type { Database } from '../db/client.ts';
import { balances, plants } from '../db/schema/index.ts';
import { plantModelRepository } from './plant-model.repository.ts';
import type { LayoutIn, SeriesPoint, SignalReading } from '../../shared/domain/balance/inputs.ts';

/** Everything the balance engine reads and writes in the database. */
export function balanceRepository(database: Database) {
  const { db, pool } = database;
  return {
    async plantIds(): Promise<number[]> {
      // A retired plant keeps its history but is no longer computed.
      return (await db.select({ id: plants.id }).from(plants).where(isNull(plants.retiredAt)).orderBy(plants.id)).map((p) => p.id);
    },
    async plant(plantId: number) {
      const [p] = await db.select().from(plants).where(eq(plants.id, plantId));
      return p ?? null;
    },
    /**
     * The layout valid at `at` (plantModelRepository.layoutAt: the geometry versions that held
     * then, units out of service then left out), in the engine's shape. Null for an unknown plant.
     */
    async layoutAt(plantId: number, at: Date): Promise<LayoutIn | null> {
      const l = await plantModelRepository(db).layoutAt(plantId, at);
      if (!l) return null;
      return {
        plantId: l.plant.id,
        code: l.plant.code,
        peakFlow_m3h: l.plant.peakFlow_m3h,
        trains: l.trains.map((t) => ({
          id: t.id,
          code: t.code,
          basins: t.basins.map((b) => ({ id: b.id, code: b.code, volume_m3: b.volume_m3, aeratedFraction: b.aeratedFraction })),
          clarifiers: t.clarifiers.map((c) => ({ id: c.id, code: c.code, area_m2: c.area_m2, sideWaterDepth_m: c.sideWaterDepth_m, count: c.count })),
          pumps: t.pumps.map((x) => ({ id: x.id, code: x.code, kind: x.kind, capacity_m3h: x.capacity_m3h })),
        })),
      };
    },
    /** Mapped signals of enabled tags with their latest value (null when none arrived yet). */
    async readings(plantId: number): Promise<SignalReading[]> {
      const r = await pool.query(
        `SELECT t.id AS tag_id, t.name, t.unit, t.expected_period_s, sm.signal, sm.target_type, sm.target_id,
                l.value, l.quality, l.ts, l.received_at
           FROM signal_map sm JOIN tags t ON t.id = sm.tag_id LEFT JOIN tag_latest l ON l.tag_id = t.id
          WHERE sm.plant_id = $1 AND t.enabled
          ORDER BY t.name`,
        [plantId],
      );
      return r.rows.map((x) => ({
        tagId: x.tag_id,
        tag: x.name,
        signal: x.signal,
        targetType: x.target_type,
        targetId: x.target_id,
        unit: x.unit,
        value: x.value,
        qualityCode: x.quality ?? 0,
        ts_ms: x.ts ? (x.ts as Date).getTime() : null,
        receivedAt_ms: x.received_at ? (x.received_at as Date).getTime() : null,
        expectedPeriod_s: x.expected_period_s,
      }));
    },
    /** rollup_1m means per tag in [from, to] (sample time). */
    async series(tagIds: number[], from: Date, to: Date): Promise<Map<number, SeriesPoint[]>> {
      const out = new Map<number, SeriesPoint[]>();
      if (!tagIds.length) return out;
      const r = await pool.query(
        `SELECT tag_id, bucket, sum / NULLIF(count, 0) AS mean, quality FROM rollup_1m
          WHERE tag_id = ANY($1::int[]) AND bucket >= $2 AND bucket <= $3 ORDER BY tag_id, bucket`,
        [tagIds, from, to],
      );
      for (const x of r.rows) {
        if (x.mean === null) continue;
        let a = out.get(x.tag_id);
        if (!a) out.set(x.tag_id, (a = []));
        a.push({ t_ms: (x.bucket as Date).getTime(), mean: x.mean, qualityCode: x.quality });
      }
      return out;
    },
    /** The latest SVI or DSVI of the plant (design §3 item 8). */
    async latestSvi(plantId: number) {
      const r = await pool.query(
        `SELECT kind, value, unit, sampled_at, flags FROM lab_results WHERE plant_id = $1 AND kind IN ('SVI','DSVI') ORDER BY sampled_at DESC LIMIT 1`,
        [plantId],
      );
      const x = r.rows[0];
      return x ? { kind: x.kind as 'SVI' | 'DSVI', value_mLg: x.value as number, unit: x.unit as string, sampledAt_ms: (x.sampled_at as Date).getTime(), flags: x.flags as string[] } : null;
    },
    /** Newest received_at over all tags of the plant, any source. */
    async lastReceived(plantId: number): Promise<number | null> {
      const r = await pool.query(`SELECT max(l.received_at) AS m FROM tag_latest l JOIN tags t ON t.id = l.tag_id WHERE t.plant_id = $1`, [plantId]);
      return r.rows[0]?.m ? (r.rows[0].m as Date).getTime() : null;
    },
    async insert(b: Balance): Promise<number> {
      const [row] = await db.insert(balances).values({ plantId: b.plantId, ts: new Date(b.ts), quality: b.quality, data: b.data, inputs: b.inputs }).returning({ id: balances.id });
      return row!.id;
    },
    /**
     * Claims one plant's interval for this engine: true when this call inserted the claim, else
     * the engine that holds it. The insert is one statement, so two processes racing for the
     * same interval cannot both win (the primary key decides).
     */
    async claimInterval(plantId: number, intervalStart: Date, by: string): Promise<{ won: true } | { won: false; by: string | null }> {
      const ins = await pool.query(`INSERT INTO balance_claims (plant_id, interval_start, claimed_by) VALUES ($1, $2, $3) ON CONFLICT DO NOTHING RETURNING 1`, [plantId, intervalStart, by]);
      if (ins.rowCount === 1) return { won: true };
      // A statement of its own: the winner's row committed before ON CONFLICT returned, so it is visible here.
      const held = await pool.query(`SELECT claimed_by FROM balance_claims WHERE plant_id = $1 AND interval_start = $2`, [plantId, intervalStart]);
      return { won: false, by: (held.rows[0]?.claimed_by as string | undefined) ?? null };
    },
    /** Drops claims of intervals that started before `before` (their balances stay). */
    async pruneClaims(before: Date): Promise<void> {
      await pool.query(`DELETE FROM balance_claims WHERE interval_start < $1`, [before]);
    },
    async latest(plantId: number) {
      const [row] = await db.select().from(balances).where(and(eq(balances.plantId, plantId))).orderBy(desc(balances.ts)).limit(1);
      return row ?? null;
    },
  };
}
export type BalanceRepository = ReturnType<typeof balanceRepository>;
