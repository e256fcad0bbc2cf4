import { and, asc, desc, eq, getTableColumns, gte, inArray, lt, sql, type SQL } from 'drizzle-orm';
import type { Db } from '../db/client.ts';
import { basins, clarifiers, labResults, trains } from '../db/schema/index.ts';

export type LabRow = typeof labResults.$inferSelect;
export type NewLabRow = typeof labResults.$inferInsert;

export function labRepository(db: Db) {
  return {
    /** Basin and clarifier codes of a plant: the valid `location` values. */
    async locationCodes(plantId: number): Promise<Set<string>> {
      const trainIds = (await db.select({ id: trains.id }).from(trains).where(eq(trains.plantId, plantId))).map((t) => t.id);
      if (!trainIds.length) return new Set();
      const [b, c] = await Promise.all([
        db.select({ code: basins.code }).from(basins).where(inArray(basins.trainId, trainIds)).orderBy(asc(basins.code)),
        db.select({ code: clarifiers.code }).from(clarifiers).where(inArray(clarifiers.trainId, trainIds)).orderBy(asc(clarifiers.code)),
      ]);
      return new Set([...b, ...c].map((r) => r.code));
    },
    /** Inserts all rows in one transaction: all stored or none. */
    insertAll(rows: NewLabRow[]): Promise<LabRow[]> {
      if (!rows.length) return Promise.resolve([]);
      return db.transaction(async (tx) => {
        const out: LabRow[] = [];
        // Chunks keep each statement under PostgreSQL's 65 535 bind parameters.
        for (let i = 0; i < rows.length; i += 1000) out.push(...(await tx.insert(labResults).values(rows.slice(i, i + 1000)).returning()));
        return out;
      });
    },
    /** Newest sample first; `before` = (sampledAt as PostgreSQL text, id) of the previous page's last row. */
    list(plantId: number, f: { kind?: LabRow['kind']; location?: string; from?: Date; to?: Date; before?: { ts: string; id: number } }, limit: number): Promise<Array<LabRow & { cursorTs: string }>> {
      const conds: SQL[] = [eq(labResults.plantId, plantId)];
      if (f.kind) conds.push(eq(labResults.kind, f.kind));
      if (f.location) conds.push(eq(labResults.location, f.location));
      if (f.from) conds.push(gte(labResults.sampledAt, f.from));
      if (f.to) conds.push(lt(labResults.sampledAt, f.to));
      if (f.before) conds.push(sql`(${labResults.sampledAt}, ${labResults.id}) < (${f.before.ts}::timestamptz, ${f.before.id}::int)`);
      return db
        .select({ ...getTableColumns(labResults), cursorTs: sql<string>`${labResults.sampledAt}::text` })
        .from(labResults)
        .where(and(...conds))
        .orderBy(desc(labResults.sampledAt), desc(labResults.id))
        .limit(limit);
    },
  };
}
export type LabRepository = ReturnType<typeof labRepository>;
