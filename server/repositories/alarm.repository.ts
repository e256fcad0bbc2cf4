import { and, eq, isNull, ne, sql } from 'drizzle-orm';
import type { Db } from '../db/client.ts';
import { alarms } from '../db/schema/index.ts';

export type AlarmRow = typeof alarms.$inferSelect;

/** The alarms table: at most one open (not cleared) alarm per plant, rule and target. */
export function alarmRepository(db: Db) {
  return {
    async open(plantId: number): Promise<AlarmRow[]> {
      return db.select().from(alarms).where(and(eq(alarms.plantId, plantId), ne(alarms.state, 'cleared')));
    },
    async get(plantId: number, id: number): Promise<AlarmRow | null> {
      const [r] = await db.select().from(alarms).where(and(eq(alarms.plantId, plantId), eq(alarms.id, id)));
      return r ?? null;
    },
    async byId(id: number): Promise<AlarmRow | null> {
      const [r] = await db.select().from(alarms).where(eq(alarms.id, id));
      return r ?? null;
    },
    /**
     * Inserts a raised alarm unless one is already open for the rule and target (then null).
     * ISA-18.2 shelving belongs to the alarm (rule and target), not to one occurrence: a shelf
     * still running on an earlier occurrence carries over to the new one.
     */
    async raise(a: { plantId: number; rule: string; target: string; priority: number; message: string; value: number | null; limit: number | null; raisedAt: Date; suppressedReason?: string | null }): Promise<AlarmRow | null> {
      const r = await db.execute<Record<string, unknown>>(sql`
        INSERT INTO alarms (plant_id, rule, target, priority, state, message, value, "limit", raised_at, suppressed_reason, shelved_until, shelved_by, shelve_reason)
        SELECT ${a.plantId}, ${a.rule}, ${a.target}, ${a.priority}, 'raised', ${a.message}, ${a.value}, ${a.limit}, ${a.raisedAt}, ${a.suppressedReason ?? null}, s.shelved_until, s.shelved_by, s.shelve_reason
        FROM (SELECT 1) one
        LEFT JOIN LATERAL (SELECT shelved_until, shelved_by, shelve_reason FROM alarms
          WHERE plant_id = ${a.plantId} AND rule = ${a.rule} AND target = ${a.target} AND shelved_until > ${a.raisedAt} ORDER BY id DESC LIMIT 1) s ON true
        WHERE NOT EXISTS (SELECT 1 FROM alarms WHERE plant_id = ${a.plantId} AND rule = ${a.rule} AND target = ${a.target} AND state <> 'cleared')
        RETURNING id`);
      const id = r.rows[0]?.id as number | undefined;
      return id === undefined ? null : this.get(a.plantId, id);
    },
    /** A suppressed alarm annunciated now: the raise time is when the operator is told. */
    async annunciate(id: number, at: Date): Promise<AlarmRow | null> {
      const [r] = await db.update(alarms).set({ suppressedReason: null, raisedAt: at }).where(and(eq(alarms.id, id), ne(alarms.state, 'cleared'))).returning();
      return r ?? null;
    },
    async shelve(id: number, until: Date | null, userId: number | null, reason: string | null): Promise<AlarmRow | null> {
      const [r] = await db.update(alarms).set({ shelvedUntil: until, shelvedBy: userId, shelveReason: reason }).where(eq(alarms.id, id)).returning();
      return r ?? null;
    },
    /**
     * Per tag name of the plant, the latest start it has to catch up from (epoch ms): the start
     * of an ingest worker still running (not stopped) or the connection of the tag's source as
     * that worker reported it (`status.sources[].connectedAt`), whichever is later.
     */
    async tagStarts(plantId: number): Promise<Map<string, number>> {
      const r = await db.execute<{ name: string; started: Date | string | null }>(sql`
        SELECT t.name, GREATEST(MAX(w.started_at), MAX((c->>'connectedAt')::timestamptz)) AS started
        FROM tags t
        JOIN ingest_workers w ON w.stopped_at IS NULL
        LEFT JOIN LATERAL jsonb_array_elements(CASE WHEN jsonb_typeof(w.status->'sources') = 'array' THEN w.status->'sources' ELSE '[]'::jsonb END) c
          ON (c->>'sourceId')::int = t.source_id
        WHERE t.plant_id = ${plantId}
        GROUP BY t.name`);
      const out = new Map<string, number>();
      for (const row of r.rows) if (row.started !== null) out.set(row.name, new Date(row.started).getTime());
      return out;
    },
    /** Annunciated and suppressed raises per bucket of `bucket_ms` in [from, to). */
    async raisedPerBucket(plantId: number, from: Date, to: Date, bucket_ms: number): Promise<{ bucket: number; raised: number; suppressed: number }[]> {
      const r = await db.execute<{ bucket: string; raised: string; suppressed: string }>(sql`
        SELECT floor(extract(epoch FROM raised_at - ${from}::timestamptz) * 1000 / ${bucket_ms})::int AS bucket,
               count(*) FILTER (WHERE suppressed_reason IS NULL) AS raised,
               count(*) FILTER (WHERE suppressed_reason IS NOT NULL) AS suppressed
        FROM alarms WHERE plant_id = ${plantId} AND raised_at >= ${from} AND raised_at < ${to}
        GROUP BY 1 ORDER BY 1`);
      return r.rows.map((x) => ({ bucket: Number(x.bucket), raised: Number(x.raised), suppressed: Number(x.suppressed) }));
    },
    async clear(id: number, at: Date): Promise<AlarmRow | null> {
      const [r] = await db.update(alarms).set({ state: 'cleared', clearedAt: at }).where(and(eq(alarms.id, id), ne(alarms.state, 'cleared'))).returning();
      return r ?? null;
    },
    /** Sets who and when; an active alarm becomes 'acknowledged', a cleared one stays cleared. */
    async acknowledge(plantId: number, id: number, userId: number, at: Date): Promise<AlarmRow | null> {
      const [r] = await db
        .update(alarms)
        .set({ acknowledgedAt: at, acknowledgedBy: userId, state: sql`CASE WHEN ${alarms.state} = 'cleared' THEN 'cleared' ELSE 'acknowledged' END` })
        .where(and(eq(alarms.plantId, plantId), eq(alarms.id, id), isNull(alarms.acknowledgedAt)))
        .returning();
      return r ?? null;
    },
    /** Alarms raised or cleared in [from, to) (shift summary). */
    async between(plantId: number, from: Date, to: Date): Promise<AlarmRow[]> {
      return db
        .select()
        .from(alarms)
        .where(and(eq(alarms.plantId, plantId), sql`((${alarms.raisedAt} >= ${from} AND ${alarms.raisedAt} < ${to}) OR (${alarms.clearedAt} >= ${from} AND ${alarms.clearedAt} < ${to}) OR ${alarms.state} <> 'cleared')`))
        .orderBy(alarms.raisedAt);
    },
  };
}
export type AlarmRepository = ReturnType<typeof alarmRepository>;
