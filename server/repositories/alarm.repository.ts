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
    /** Inserts a raised alarm unless one is already open for the rule and target (then null). */
    async raise(a: { plantId: number; rule: string; target: string; priority: number; message: string; value: number | null; limit: number | null; raisedAt: Date }): Promise<AlarmRow | null> {
      const r = await db.execute<Record<string, unknown>>(sql`
        INSERT INTO alarms (plant_id, rule, target, priority, state, message, value, "limit", raised_at)
        SELECT ${a.plantId}, ${a.rule}, ${a.target}, ${a.priority}, 'raised', ${a.message}, ${a.value}, ${a.limit}, ${a.raisedAt}
        WHERE NOT EXISTS (SELECT 1 FROM alarms WHERE plant_id = ${a.plantId} AND rule = ${a.rule} AND target = ${a.target} AND state <> 'cleared')
        RETURNING id`);
      const id = r.rows[0]?.id as number | undefined;
      return id === undefined ? null : this.get(a.plantId, id);
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
