import { and, asc, eq, inArray, sql } from 'drizzle-orm';
import type { Actor } from '../services/audit.service.ts';
import type { DbOrTx } from '../db/client.ts';
import { auditLog, basins, basinVersions, clarifiers, clarifierVersions, plants, pumps, pumpVersions, settings, signalMap, sources, tags, trains } from '../db/schema/index.ts';
import { versionAt } from '../../shared/domain/geometry-versions.ts';
import { sourceTagWrites } from './wiring.repository.ts';


export type PlantRow = typeof plants.$inferSelect;
export type NewPlantRow = typeof plants.$inferInsert;
export type TrainRow = typeof trains.$inferSelect;
export type BasinRow = typeof basins.$inferSelect;
export type ClarifierRow = typeof clarifiers.$inferSelect;
export type PumpRow = typeof pumps.$inferSelect;
export type SourceRow = typeof sources.$inferSelect;
export type TagRow = typeof tags.$inferSelect;
export type MappingRow = typeof signalMap.$inferSelect;

export interface BasinGeom { volume_m3: number; aeratedFraction: number; sideWaterDepth_m: number | null; inService: boolean }
export interface ClarifierGeom { area_m2: number; sideWaterDepth_m: number; feedDepth_m: number | null; count: number; inService: boolean }
export interface PumpGeom { capacity_m3h: number; inService: boolean }
export type Versioned<G> = G & { effectiveFrom: Date };

export type UnitKind = 'basin' | 'clarifier' | 'pump';
export interface ModelRows {
  trains: TrainRow[];
  basins: Array<BasinRow & { versions: Versioned<BasinGeom>[] }>;
  clarifiers: Array<ClarifierRow & { versions: Versioned<ClarifierGeom>[] }>;
  pumps: Array<PumpRow & { versions: Versioned<PumpGeom>[] }>;
}

/** The layout valid at one time: only units in service then, with the geometry that held then. */
export interface LayoutAt {
  plant: PlantRow;
  at: Date;
  trains: Array<{
    id: number;
    code: string;
    name: string;
    basins: Array<{ id: number; code: string; name: string } & BasinGeom>;
    clarifiers: Array<{ id: number; code: string; name: string } & ClarifierGeom>;
    pumps: Array<{ id: number; code: string; name: string; kind: 'ras' | 'was'; clarifierId: number | null } & PumpGeom>;
  }>;
}


/**
 * Plants, their trains, basins, clarifiers and pumps with effective-dated geometry, and what a
 * configuration document also covers (the plant's settings, sources, tags, signal map). The only
 * module that writes the plant model. `transaction(fn)` hands `fn` the same repository bound to
 * one transaction.
 */
function coreRepository(db: DbOrTx) {
  const unitsOfPlant = async (plantId: number) => {
    const tr = await db.select().from(trains).where(eq(trains.plantId, plantId)).orderBy(asc(trains.code));
    return tr;
  };

  const repo = {
    /** One audit_log row, in the same transaction as the write it records (no secrets in details). */
    async audit(p: Actor | null, action: string, target: string, details?: Record<string, unknown>) {
      await db.insert(auditLog).values({ userId: p?.userId ?? null, tokenId: p?.tokenId ?? null, actor: p ? p.email + (p.tokenId ? ` (token ${p.tokenId})` : '') : 'system', action, target, details: details ?? null, ip: p?.ip ?? null });
    },

    // ---- plants ----
    async plant(id: number): Promise<PlantRow | undefined> {
      const [p] = await db.select().from(plants).where(eq(plants.id, id));
      return p;
    },
    async plantByCode(code: string): Promise<PlantRow | undefined> {
      const [p] = await db.select().from(plants).where(eq(plants.code, code));
      return p;
    },
    async insertPlant(row: NewPlantRow): Promise<PlantRow> {
      const [p] = await db.insert(plants).values(row).returning();
      return p!;
    },
    async updatePlant(id: number, patch: Partial<NewPlantRow>): Promise<PlantRow> {
      const [p] = await db.update(plants).set(patch).where(eq(plants.id, id)).returning();
      return p!;
    },
    async deletePlant(id: number): Promise<void> {
      // Settings rows carry no foreign key (plant 0 is the global level).
      await db.delete(settings).where(eq(settings.plantId, id));
      await db.delete(plants).where(eq(plants.id, id));
    },
    /** Whether any stored sample belongs to a tag of the plant. */
    async hasSamples(plantId: number): Promise<boolean> {
      const r = await db.execute(sql`SELECT EXISTS (SELECT 1 FROM samples s JOIN tags t ON t.id = s.tag_id WHERE t.plant_id = ${plantId}) AS x`);
      return Boolean((r.rows[0] as { x: boolean } | undefined)?.x);
    },

    // ---- trains and units ----
    trains: unitsOfPlant,
    async train(plantId: number, id: number): Promise<TrainRow | undefined> {
      const [t] = await db.select().from(trains).where(and(eq(trains.id, id), eq(trains.plantId, plantId)));
      return t;
    },
    async insertTrain(plantId: number, code: string, name: string): Promise<TrainRow> {
      const [t] = await db.insert(trains).values({ plantId, code, name }).returning();
      return t!;
    },
    async updateTrain(id: number, patch: { code?: string; name?: string }): Promise<TrainRow> {
      const [t] = await db.update(trains).set(patch).where(eq(trains.id, id)).returning();
      return t!;
    },
    async deleteTrain(id: number): Promise<void> {
      await db.delete(trains).where(eq(trains.id, id));
    },

    /** A unit of a plant (via its train's plant), or undefined when it belongs to another plant. */
    async basin(plantId: number, id: number): Promise<BasinRow | undefined> {
      const [r] = await db.select({ b: basins }).from(basins).innerJoin(trains, eq(trains.id, basins.trainId)).where(and(eq(basins.id, id), eq(trains.plantId, plantId)));
      return r?.b;
    },
    async clarifier(plantId: number, id: number): Promise<ClarifierRow | undefined> {
      const [r] = await db.select({ c: clarifiers }).from(clarifiers).innerJoin(trains, eq(trains.id, clarifiers.trainId)).where(and(eq(clarifiers.id, id), eq(trains.plantId, plantId)));
      return r?.c;
    },
    /** A clarifier by id whatever its plant (to tell "another plant's clarifier" from "no such clarifier"). */
    async clarifierPlant(id: number): Promise<number | undefined> {
      const [r] = await db.select({ plantId: trains.plantId }).from(clarifiers).innerJoin(trains, eq(trains.id, clarifiers.trainId)).where(eq(clarifiers.id, id));
      return r?.plantId;
    },
    async pump(plantId: number, id: number): Promise<PumpRow | undefined> {
      const [r] = await db.select({ p: pumps }).from(pumps).innerJoin(trains, eq(trains.id, pumps.trainId)).where(and(eq(pumps.id, id), eq(trains.plantId, plantId)));
      return r?.p;
    },
    async insertBasin(row: { trainId: number; code: string; name: string }): Promise<BasinRow> {
      const [r] = await db.insert(basins).values(row).returning();
      return r!;
    },
    async insertClarifier(row: { trainId: number; code: string; name: string }): Promise<ClarifierRow> {
      const [r] = await db.insert(clarifiers).values(row).returning();
      return r!;
    },
    async insertPump(row: { trainId: number; code: string; name: string; kind: 'ras' | 'was'; clarifierId: number | null }): Promise<PumpRow> {
      const [r] = await db.insert(pumps).values(row).returning();
      return r!;
    },
    async updateBasin(id: number, patch: Partial<{ trainId: number; code: string; name: string }>) {
      if (Object.keys(patch).length) await db.update(basins).set(patch).where(eq(basins.id, id));
    },
    async updateClarifier(id: number, patch: Partial<{ trainId: number; code: string; name: string }>) {
      if (Object.keys(patch).length) await db.update(clarifiers).set(patch).where(eq(clarifiers.id, id));
    },
    async updatePump(id: number, patch: Partial<{ trainId: number; code: string; name: string; kind: 'ras' | 'was'; clarifierId: number | null }>) {
      if (Object.keys(patch).length) await db.update(pumps).set(patch).where(eq(pumps.id, id));
    },
    async deleteUnit(kind: UnitKind, id: number): Promise<void> {
      // Mappings point at units by type and id (no foreign key): they go with the unit.
      await db.delete(signalMap).where(and(eq(signalMap.targetType, kind), eq(signalMap.targetId, id)));
      if (kind === 'basin') await db.delete(basins).where(eq(basins.id, id));
      else if (kind === 'clarifier') await db.delete(clarifiers).where(eq(clarifiers.id, id));
      else await db.delete(pumps).where(eq(pumps.id, id));
    },
    async deleteMappingsOf(kind: 'train', id: number): Promise<void> {
      await db.delete(signalMap).where(and(eq(signalMap.targetType, kind), eq(signalMap.targetId, id)));
    },

    // ---- geometry versions ----
    /** Inserts a version, or replaces the one starting at exactly the same time. */
    async putBasinVersion(basinId: number, v: Versioned<BasinGeom>) {
      await db.insert(basinVersions).values({ basinId, ...v }).onConflictDoUpdate({ target: [basinVersions.basinId, basinVersions.effectiveFrom], set: v });
    },
    async putClarifierVersion(clarifierId: number, v: Versioned<ClarifierGeom>) {
      await db.insert(clarifierVersions).values({ clarifierId, ...v }).onConflictDoUpdate({ target: [clarifierVersions.clarifierId, clarifierVersions.effectiveFrom], set: v });
    },
    async putPumpVersion(pumpId: number, v: Versioned<PumpGeom>) {
      await db.insert(pumpVersions).values({ pumpId, ...v }).onConflictDoUpdate({ target: [pumpVersions.pumpId, pumpVersions.effectiveFrom], set: v });
    },
    async deleteVersion(kind: UnitKind, unitId: number, effectiveFrom: Date): Promise<void> {
      if (kind === 'basin') await db.delete(basinVersions).where(and(eq(basinVersions.basinId, unitId), eq(basinVersions.effectiveFrom, effectiveFrom)));
      else if (kind === 'clarifier') await db.delete(clarifierVersions).where(and(eq(clarifierVersions.clarifierId, unitId), eq(clarifierVersions.effectiveFrom, effectiveFrom)));
      else await db.delete(pumpVersions).where(and(eq(pumpVersions.pumpId, unitId), eq(pumpVersions.effectiveFrom, effectiveFrom)));
    },

    /** Every train and unit of a plant with all its geometry versions (oldest first). */
    async model(plantId: number): Promise<ModelRows> {
      const tr = await unitsOfPlant(plantId);
      const ids = tr.map((t) => t.id);
      if (!ids.length) return { trains: tr, basins: [], clarifiers: [], pumps: [] };
      // One after the other: inside a transaction there is one connection, which runs one query at a time.
      const bs = await db.select().from(basins).where(inArray(basins.trainId, ids)).orderBy(asc(basins.code));
      const cs = await db.select().from(clarifiers).where(inArray(clarifiers.trainId, ids)).orderBy(asc(clarifiers.code));
      const ps = await db.select().from(pumps).where(inArray(pumps.trainId, ids)).orderBy(asc(pumps.code));
      const bv = bs.length ? await db.select().from(basinVersions).where(inArray(basinVersions.basinId, bs.map((b) => b.id))).orderBy(asc(basinVersions.effectiveFrom)) : [];
      const cv = cs.length ? await db.select().from(clarifierVersions).where(inArray(clarifierVersions.clarifierId, cs.map((c) => c.id))).orderBy(asc(clarifierVersions.effectiveFrom)) : [];
      const pv = ps.length ? await db.select().from(pumpVersions).where(inArray(pumpVersions.pumpId, ps.map((p) => p.id))).orderBy(asc(pumpVersions.effectiveFrom)) : [];
      return {
        trains: tr,
        basins: bs.map((b) => ({ ...b, versions: bv.filter((v) => v.basinId === b.id).map(({ effectiveFrom, volume_m3, aeratedFraction, sideWaterDepth_m, inService }) => ({ effectiveFrom, volume_m3, aeratedFraction, sideWaterDepth_m, inService })) })),
        clarifiers: cs.map((c) => ({ ...c, versions: cv.filter((v) => v.clarifierId === c.id).map(({ effectiveFrom, area_m2, sideWaterDepth_m, feedDepth_m, count, inService }) => ({ effectiveFrom, area_m2, sideWaterDepth_m, feedDepth_m, count, inService })) })),
        pumps: ps.map((p) => ({ ...p, versions: pv.filter((v) => v.pumpId === p.id).map(({ effectiveFrom, capacity_m3h, inService }) => ({ effectiveFrom, capacity_m3h, inService })) })),
      };
    },

    /**
     * The layout of a plant valid at `at`: each unit with the geometry version that held then
     * (the first version for times before it); units out of service then, or without any
     * version, are left out. Undefined for an unknown plant.
     */
    async layoutAt(plantId: number, at: Date): Promise<LayoutAt | undefined> {
      const plant = await repo.plant(plantId);
      if (!plant) return undefined;
      const m = await repo.model(plantId);
      const held = <G extends { inService: boolean }>(versions: Versioned<G>[]) => {
        const v = versionAt(versions, at);
        return v && v.inService ? v : undefined;
      };
      return {
        plant,
        at,
        trains: m.trains.map((t) => ({
          id: t.id,
          code: t.code,
          name: t.name,
          basins: m.basins.flatMap((b) => {
            const v = b.trainId === t.id ? held(b.versions) : undefined;
            return v ? [{ id: b.id, code: b.code, name: b.name, volume_m3: v.volume_m3, aeratedFraction: v.aeratedFraction, sideWaterDepth_m: v.sideWaterDepth_m, inService: true }] : [];
          }),
          clarifiers: m.clarifiers.flatMap((c) => {
            const v = c.trainId === t.id ? held(c.versions) : undefined;
            return v ? [{ id: c.id, code: c.code, name: c.name, area_m2: v.area_m2, sideWaterDepth_m: v.sideWaterDepth_m, feedDepth_m: v.feedDepth_m, count: v.count, inService: true }] : [];
          }),
          pumps: m.pumps.flatMap((x) => {
            const v = x.trainId === t.id ? held(x.versions) : undefined;
            return v ? [{ id: x.id, code: x.code, name: x.name, kind: x.kind, clarifierId: x.clarifierId, capacity_m3h: v.capacity_m3h, inService: true }] : [];
          }),
        })),
      };
    },

    // ---- what a configuration document also holds ----
    async plantSettings(plantId: number): Promise<Array<{ key: string; value: unknown }>> {
      return db.select({ key: settings.key, value: settings.value }).from(settings).where(eq(settings.plantId, plantId)).orderBy(asc(settings.key));
    },
    async putSetting(plantId: number, key: string, value: unknown, userId: number | null) {
      await db.insert(settings).values({ plantId, key, value, updatedBy: userId }).onConflictDoUpdate({ target: [settings.plantId, settings.key], set: { value, updatedBy: userId, updatedAt: new Date() } });
    },
    async deleteSetting(plantId: number, key: string) {
      await db.delete(settings).where(and(eq(settings.plantId, plantId), eq(settings.key, key)));
    },
    sources(plantId: number): Promise<SourceRow[]> {
      return db.select().from(sources).where(eq(sources.plantId, plantId)).orderBy(asc(sources.name));
    },
    tags(plantId: number): Promise<TagRow[]> {
      return db.select().from(tags).where(eq(tags.plantId, plantId)).orderBy(asc(tags.name));
    },
    mappings(plantId: number): Promise<MappingRow[]> {
      return db.select().from(signalMap).where(eq(signalMap.plantId, plantId)).orderBy(asc(signalMap.signal));
    },
    async putMapping(row: typeof signalMap.$inferInsert) {
      await db.insert(signalMap).values(row).onConflictDoUpdate({ target: [signalMap.plantId, signalMap.signal, signalMap.targetType, signalMap.targetId], set: { tagId: row.tagId } });
    },
    // Source, tag and mapping rows one at a time: the same statements as the wiring API's.
    ...sourceTagWrites(db),
  };
  return repo;
}
/** The repository's functions without `transaction` (what a transaction callback gets). */
export type PlantModelTx = ReturnType<typeof coreRepository>;

export function plantModelRepository(db: DbOrTx) {
  return {
    ...coreRepository(db),
    /** Runs `fn` with the repository bound to one transaction (rolled back when fn throws). */
    transaction<T>(fn: (r: PlantModelTx) => Promise<T>): Promise<T> {
      return db.transaction((tx) => fn(coreRepository(tx)));
    },
  };
}
export type PlantModelRepository = ReturnType<typeof plantModelRepository>;
