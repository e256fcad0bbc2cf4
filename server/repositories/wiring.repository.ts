import { and, asc, count, eq, inArray, sql } from 'drizzle-orm';
import type { Db, DbOrTx } from '../db/client.ts';
import { basins, clarifiers, deadLetters, plants, pumps, signalMap, sources, tags, trains } from '../db/schema/index.ts';

export type SourceRow = typeof sources.$inferSelect;
export type NewSourceRow = typeof sources.$inferInsert;
export type TagRow = typeof tags.$inferSelect;
export type NewTagRow = typeof tags.$inferInsert;

/** A tag's own settings as the wiring answer and the configuration document both give them. */
export function tagSettings(t: TagRow) {
  const { address, unit, description, scaleGain, scaleOffset, deadband, expectedPeriod_s, rangeLow, rangeHigh, samplingInterval_ms, kind, enabled } = t;
  return { address, unit, description, scaleGain, scaleOffset, deadband, expectedPeriod_s, rangeLow, rangeHigh, samplingInterval_ms, kind, enabled };
}
export type MappingRow = typeof signalMap.$inferSelect;
export type NewMappingRow = typeof signalMap.$inferInsert;

/** The unique index a PostgreSQL unique violation (23505) hit, or null for any other error. */
export function uniqueViolation(err: unknown): string | null {
  // drizzle 0.45 wraps driver errors; the pg error is the cause.
  for (let e = err as { code?: string; constraint?: string; cause?: unknown } | undefined, i = 0; e && i < 3; e = e.cause as typeof e, i++) {
    if (e.code === '23505') return e.constraint ?? '';
  }
  return null;
}

// Written out: inside a select list drizzle renders columns unqualified, and the subquery would
// then compare tags.source_id with tags.id.
const tagCount = sql<number>`(SELECT count(*)::int FROM tags t WHERE t.source_id = "sources"."id")`;

/** A mappable target of a plant: the plant itself and its basins, clarifiers and pumps. */
export interface TargetRow {
  type: 'plant' | 'basin' | 'clarifier' | 'pump';
  id: number;
  code: string;
}

/**
 * Source, tag and mapping rows written one at a time, on the database or inside a transaction:
 * the wiring API's edits and the configuration document's import (plant-model.repository.ts).
 */
export function sourceTagWrites(db: DbOrTx) {
  return {
    async insertSource(row: NewSourceRow): Promise<SourceRow> {
      const [r] = await db.insert(sources).values(row).returning();
      return r!;
    },
    async updateSource(id: number, patch: Partial<NewSourceRow>): Promise<SourceRow | undefined> {
      const [r] = await db.update(sources).set(patch).where(eq(sources.id, id)).returning();
      return r;
    },
    async deleteSource(id: number): Promise<boolean> {
      return (await db.delete(sources).where(eq(sources.id, id)).returning({ id: sources.id })).length > 0;
    },
    async insertTag(row: NewTagRow): Promise<TagRow> {
      const [r] = await db.insert(tags).values(row).returning();
      return r!;
    },
    async updateTag(id: number, patch: Partial<NewTagRow>): Promise<TagRow | undefined> {
      const [r] = await db.update(tags).set(patch).where(eq(tags.id, id)).returning();
      return r;
    },
    async deleteTag(id: number): Promise<boolean> {
      return (await db.delete(tags).where(eq(tags.id, id)).returning({ id: tags.id })).length > 0;
    },
    async deleteMapping(id: number): Promise<boolean> {
      return (await db.delete(signalMap).where(eq(signalMap.id, id)).returning({ id: signalMap.id })).length > 0;
    },
  };
}

/** Sources, tags, signal map and dead-letter counts of the wiring API. */
export function wiringRepository(db: Db) {
  return {
    ...sourceTagWrites(db),
    listSources(plantId: number) {
      return db
        .select({ source: sources, tags: tagCount })
        .from(sources)
        .where(eq(sources.plantId, plantId))
        .orderBy(asc(sources.name));
    },
    async source(id: number): Promise<{ source: SourceRow; tags: number } | undefined> {
      const [r] = await db
        .select({ source: sources, tags: tagCount })
        .from(sources)
        .where(eq(sources.id, id));
      return r;
    },
    async sourceByName(plantId: number, name: string) {
      const [r] = await db.select().from(sources).where(and(eq(sources.plantId, plantId), eq(sources.name, name)));
      return r;
    },

    listTags(plantId: number) {
      return db
        .select({ tag: tags, sourceName: sources.name, sourceKind: sources.kind })
        .from(tags)
        .innerJoin(sources, eq(sources.id, tags.sourceId))
        .where(eq(tags.plantId, plantId))
        .orderBy(asc(tags.name));
    },
    async tag(id: number) {
      const [r] = await db.select({ tag: tags, sourceName: sources.name, sourceKind: sources.kind }).from(tags).innerJoin(sources, eq(sources.id, tags.sourceId)).where(eq(tags.id, id));
      return r;
    },
    async tagNames(plantId: number): Promise<Set<string>> {
      return new Set((await db.select({ name: tags.name }).from(tags).where(eq(tags.plantId, plantId))).map((r) => r.name));
    },
    async tagAddresses(sourceIds: number[]): Promise<Set<string>> {
      if (!sourceIds.length) return new Set();
      const rows = await db.select({ s: tags.sourceId, a: tags.address }).from(tags).where(inArray(tags.sourceId, sourceIds));
      return new Set(rows.map((r) => `${r.s}\u0000${r.a}`));
    },

    mappings(plantId: number) {
      return db.select().from(signalMap).where(eq(signalMap.plantId, plantId)).orderBy(asc(signalMap.signal));
    },
    async mapping(id: number) {
      const [r] = await db.select().from(signalMap).where(eq(signalMap.id, id));
      return r;
    },
    /** Sets the tag of (plant, signal, target): inserts, or replaces the tag of the existing row. Returns the row and the tag it replaced. */
    async putMapping(m: NewMappingRow): Promise<{ row: MappingRow; replacedTagId: number | null }> {
      return db.transaction(async (tx) => {
        const [prev] = await tx
          .select()
          .from(signalMap)
          .where(and(eq(signalMap.plantId, m.plantId), eq(signalMap.signal, m.signal), eq(signalMap.targetType, m.targetType), eq(signalMap.targetId, m.targetId)))
          .for('update');
        if (prev) {
          const [row] = await tx.update(signalMap).set({ tagId: m.tagId }).where(eq(signalMap.id, prev.id)).returning();
          return { row: row!, replacedTagId: prev.tagId === m.tagId ? null : prev.tagId };
        }
        const [row] = await tx.insert(signalMap).values(m).returning();
        return { row: row!, replacedTagId: null };
      });
    },

    /** The plant and its basins, clarifiers and pumps (the targets a signal can name). */
    async targets(plantId: number): Promise<TargetRow[]> {
      const [p] = await db.select({ id: plants.id, code: plants.code }).from(plants).where(eq(plants.id, plantId));
      if (!p) return [];
      const out: TargetRow[] = [{ type: 'plant', id: p.id, code: p.code }];
      const trainIds = (await db.select({ id: trains.id }).from(trains).where(eq(trains.plantId, plantId))).map((t) => t.id);
      if (!trainIds.length) return out;
      const [b, c, x] = await Promise.all([
        db.select({ id: basins.id, code: basins.code }).from(basins).where(inArray(basins.trainId, trainIds)),
        db.select({ id: clarifiers.id, code: clarifiers.code }).from(clarifiers).where(inArray(clarifiers.trainId, trainIds)),
        db.select({ id: pumps.id, code: pumps.code }).from(pumps).where(inArray(pumps.trainId, trainIds)),
      ]);
      for (const r of b) out.push({ type: 'basin', ...r });
      for (const r of c) out.push({ type: 'clarifier', ...r });
      for (const r of x) out.push({ type: 'pump', ...r });
      return out;
    },

    /**
     * Inserts tags and then their mappings in one transaction (all or nothing); a mapping names
     * its tag by the index in `rows` and replaces an existing mapping of the same signal+target.
     */
    importTags(rows: NewTagRow[], maps: Array<{ row: number; plantId: number; signal: string; targetType: NewMappingRow['targetType']; targetId: number }>): Promise<TagRow[]> {
      return db.transaction(async (tx) => {
        const out: TagRow[] = [];
        for (let i = 0; i < rows.length; i += 1000) out.push(...(await tx.insert(tags).values(rows.slice(i, i + 1000)).returning()));
        for (const m of maps) {
          const tagId = out[m.row]!.id;
          await tx
            .insert(signalMap)
            .values({ plantId: m.plantId, signal: m.signal, targetType: m.targetType, targetId: m.targetId, tagId })
            .onConflictDoUpdate({ target: [signalMap.plantId, signalMap.signal, signalMap.targetType, signalMap.targetId], set: { tagId } });
        }
        return out;
      });
    },

    /** Plant of each source id (for scoping the ingest status). */
    async sourcePlants(ids: number[]): Promise<Map<number, number>> {
      if (!ids.length) return new Map();
      const rows = await db.select({ id: sources.id, plantId: sources.plantId }).from(sources).where(inArray(sources.id, ids));
      return new Map(rows.map((r) => [r.id, r.plantId]));
    },
    /**
     * Dead letters (rows: one per delivery identity) seen in the last hour — first or again — and
     * in total, and `repeats`: arrivals beyond each row's first (a redelivered or republished bad
     * message). `plantIds` limits them to those plants' sources.
     */
    async deadLetterCounts(since: Date, plantIds: number[] | null): Promise<{ lastHour: number; total: number; repeats: number }> {
      const scope = plantIds ? inArray(deadLetters.sourceId, db.select({ id: sources.id }).from(sources).where(inArray(sources.plantId, plantIds))) : undefined;
      const [r] = await db
        .select({
          total: count(),
          lastHour: sql<number>`count(*) FILTER (WHERE coalesce(${deadLetters.lastSeenAt}, ${deadLetters.ts}) >= ${since})::int`,
          repeats: sql<number>`coalesce(sum(${deadLetters.timesSeen} - 1), 0)::int`,
        })
        .from(deadLetters)
        .where(scope);
      return { lastHour: r?.lastHour ?? 0, total: r?.total ?? 0, repeats: r?.repeats ?? 0 };
    },
  };
}
export type WiringRepository = ReturnType<typeof wiringRepository>;
