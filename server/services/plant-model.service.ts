import type {
  BasinCreate,
  BasinOut,
  ClarifierOut,
  PumpOut,
  BasinPatch,
  ClarifierCreate,
  ClarifierPatch,
  PlantCreate,
  PlantModelOut,
  PlantOut,
  PlantPatch,
  PumpCreate,
  PumpPatch,
  TrainCreate,
  TrainOut,
  TrainPatch,
} from '../../shared/contracts/plant-model.ts';
import { versionAt } from '../../shared/domain/geometry-versions.ts';
import type { Clock } from '../app-context.ts';
import type { Principal } from '../auth/principal.ts';
import { ConflictError, ForbiddenError, NotFoundError, ValidationError } from '../http/errors.ts';
import type { BasinGeom, ClarifierGeom, ModelRows, PlantModelRepository, PlantModelTx, PlantRow, PumpGeom, UnitKind, Versioned } from '../repositories/plant-model.repository.ts';

export interface PlantModelServiceDeps {
  modelRepo: PlantModelRepository;
  /** Wall clock for the default `effectiveFrom` (tests inject one). */
  clock: Clock;
}

/** 403 when a plant-scoped token asks for a plant outside its scope (before existence, so scopes do not reveal plants). */
export function assertScope(p: Principal, plantId: number): void {
  if (p.plantIds && !p.plantIds.includes(plantId)) throw new ForbiddenError(`this token is not scoped to plant ${plantId}`);
}

export function plantOut(p: PlantRow): PlantOut {
  return { id: p.id, code: p.code, name: p.name, timezone: p.timezone, peakFlow_m3h: p.peakFlow_m3h, unitSystem: p.unitSystem, retiredAt: p.retiredAt?.toISOString() ?? null, createdAt: p.createdAt.toISOString() };
}

const iso = (d: Date) => d.toISOString();
const basinV = (v: Versioned<BasinGeom>) => ({ effectiveFrom: iso(v.effectiveFrom), volume_m3: v.volume_m3, aeratedFraction: v.aeratedFraction, sideWaterDepth_m: v.sideWaterDepth_m, inService: v.inService });
const clarV = (v: Versioned<ClarifierGeom>) => ({ effectiveFrom: iso(v.effectiveFrom), area_m2: v.area_m2, sideWaterDepth_m: v.sideWaterDepth_m, feedDepth_m: v.feedDepth_m, count: v.count, inService: v.inService });
const pumpV = (v: Versioned<PumpGeom>) => ({ effectiveFrom: iso(v.effectiveFrom), capacity_m3h: v.capacity_m3h, inService: v.inService });

/** The model with every unit's geometry at `at` and its full history (the API's PlantModel). */
export function modelOut(plant: PlantRow, m: ModelRows, at: Date): PlantModelOut {
  const cur = <G extends { inService: boolean }>(versions: Versioned<G>[], fallback: G): G & { effectiveFrom: string } => {
    const v = versionAt(versions, at);
    return v ? { ...v, effectiveFrom: iso(v.effectiveFrom) } : { ...fallback, effectiveFrom: at.toISOString() };
  };
  return {
    plant: plantOut(plant),
    at: at.toISOString(),
    trains: m.trains.map((t) => ({
      id: t.id,
      code: t.code,
      name: t.name,
      basins: m.basins
        .filter((b) => b.trainId === t.id)
        .map((b) => ({ id: b.id, trainId: b.trainId, code: b.code, name: b.name, ...cur(b.versions, { volume_m3: 0, aeratedFraction: 0, sideWaterDepth_m: null, inService: false }), history: b.versions.map(basinV) })),
      clarifiers: m.clarifiers
        .filter((c) => c.trainId === t.id)
        .map((c) => ({ id: c.id, trainId: c.trainId, code: c.code, name: c.name, ...cur(c.versions, { area_m2: 0, sideWaterDepth_m: 0, feedDepth_m: null, count: 1, inService: false }), history: c.versions.map(clarV) })),
      pumps: m.pumps
        .filter((x) => x.trainId === t.id)
        .map((x) => ({ id: x.id, trainId: x.trainId, clarifierId: x.clarifierId, code: x.code, name: x.name, kind: x.kind, ...cur(x.versions, { capacity_m3h: 0, inService: false }), history: x.versions.map(pumpV) })),
    })),
  };
}

interface UnitOutOf {
  basin: BasinOut;
  clarifier: ClarifierOut;
  pump: PumpOut;
}

/** Keys of a patch that are geometry (a new effective-dated version), not identity. */
const pickDefined = <T extends object, K extends keyof T>(o: T, keys: readonly K[]): Partial<Pick<T, K>> => {
  const out: Partial<Pick<T, K>> = {};
  for (const k of keys) if (o[k] !== undefined) out[k] = o[k];
  return out;
};

/**
 * Plants and their process model: create, edit, retire, delete; trains, basins, clarifiers and
 * pumps with effective-dated geometry. Takes the caller and validated input; every write is
 * audited in the transaction that makes it.
 */
export function createPlantModelService({ modelRepo: repo, clock }: PlantModelServiceDeps) {
  const now = () => new Date(clock());

  async function requirePlant(p: Principal, plantId: number): Promise<PlantRow> {
    assertScope(p, plantId);
    const plant = await repo.plant(plantId);
    if (!plant) throw new NotFoundError(`no plant ${plantId}`);
    return plant;
  }

  /** 422 when another unit of the same kind in the plant already has the code (signal maps and documents refer to units by code). */
  async function assertFreeCode(r: PlantModelTx, plantId: number, kind: UnitKind | 'train', code: string, selfId?: number) {
    const m = await r.model(plantId);
    const list = kind === 'train' ? m.trains : kind === 'basin' ? m.basins : kind === 'clarifier' ? m.clarifiers : m.pumps;
    if (list.some((u) => u.code === code && u.id !== selfId)) throw new ValidationError({ code: [`a ${kind} with code "${code}" already exists in this plant`] });
  }

  async function requireTrain(r: PlantModelTx, plantId: number, trainId: number, field = 'trainId') {
    const t = await r.train(plantId, trainId);
    if (!t) throw new ValidationError({ [field]: [`no train ${trainId} in plant ${plantId}`] });
    return t;
  }

  /** The clarifier a pump serves: it must belong to the same plant (422 otherwise). */
  async function requirePumpClarifier(r: PlantModelTx, plantId: number, clarifierId: number) {
    const c = await r.clarifier(plantId, clarifierId);
    if (c) return c;
    const other = await r.clarifierPlant(clarifierId);
    throw new ValidationError({ clarifierId: [other !== undefined ? `clarifier ${clarifierId} belongs to another plant; a pump serves a clarifier of its own plant` : `no clarifier ${clarifierId}`] });
  }

  const effective = (s: string | undefined) => (s ? new Date(s) : now());

  async function unitOrThrow<T>(found: T | undefined, kind: string, id: number): Promise<T> {
    if (!found) throw new NotFoundError(`no ${kind} ${id} in this plant`);
    return found;
  }

  /** One unit as the model answers it (geometry now, history). */
  async function unitOut<K extends UnitKind>(plant: PlantRow, kind: K, id: number): Promise<UnitOutOf[K]> {
    const out = modelOut(plant, await repo.model(plant.id), now());
    const lists: { [U in UnitKind]: UnitOutOf[U][] } = { basin: out.trains.flatMap((t) => t.basins), clarifier: out.trains.flatMap((t) => t.clarifiers), pump: out.trains.flatMap((t) => t.pumps) };
    const found = lists[kind].find((u) => u.id === id);
    if (!found) throw new NotFoundError(`no ${kind} ${id} in this plant`);
    return found;
  }

  return {
    requirePlant,

    async create(p: Principal, input: PlantCreate): Promise<PlantOut> {
      if (p.plantIds) throw new ForbiddenError('a plant-scoped token cannot create plants');
      return repo.transaction(async (r) => {
        if (await r.plantByCode(input.code)) throw new ConflictError(`a plant with code "${input.code}" exists`);
        const row = await r.insertPlant({ code: input.code, name: input.name, timezone: input.timezone, peakFlow_m3h: input.peakFlow_m3h ?? null, unitSystem: input.unitSystem ?? 'SI' });
        await r.audit(p, 'plant.create', `plant:${row.id}`, { code: row.code, name: row.name });
        return plantOut(row);
      });
    },

    async patch(p: Principal, plantId: number, input: PlantPatch): Promise<PlantOut> {
      await requirePlant(p, plantId);
      return repo.transaction(async (r) => {
        if (input.code !== undefined) {
          const other = await r.plantByCode(input.code);
          if (other && other.id !== plantId) throw new ConflictError(`a plant with code "${input.code}" exists`);
        }
        const { retiredAt, ...rest } = input;
        const row = await r.updatePlant(plantId, { ...rest, ...(retiredAt !== undefined ? { retiredAt: retiredAt === null ? null : new Date(retiredAt) } : {}) });
        await r.audit(p, retiredAt ? 'plant.retire' : 'plant.update', `plant:${plantId}`, { ...input });
        return plantOut(row);
      });
    },

    /** Refuses (409) while samples exist unless forced; retiring (PATCH retiredAt) is the way to keep history. */
    async remove(p: Principal, plantId: number, force: boolean): Promise<{ deleted: true }> {
      const plant = await requirePlant(p, plantId);
      return repo.transaction(async (r) => {
        if (!force && (await r.hasSamples(plantId))) throw new ConflictError(`plant ${plant.code} has stored samples; retire it (PATCH retiredAt) to keep its history, or delete with ?force=1`);
        await r.deletePlant(plantId);
        await r.audit(p, 'plant.delete', `plant:${plantId}`, { code: plant.code, force });
        return { deleted: true as const };
      });
    },

    async model(p: Principal, plantId: number, at?: string): Promise<PlantModelOut> {
      const plant = await requirePlant(p, plantId);
      return modelOut(plant, await repo.model(plantId), at ? new Date(at) : now());
    },

    // ---- trains ----
    async createTrain(p: Principal, plantId: number, input: TrainCreate): Promise<TrainOut> {
      await requirePlant(p, plantId);
      return repo.transaction(async (r) => {
        await assertFreeCode(r, plantId, 'train', input.code);
        const t = await r.insertTrain(plantId, input.code, input.name);
        await r.audit(p, 'train.create', `train:${t.id}`, { plantId, ...input });
        return { id: t.id, code: t.code, name: t.name };
      });
    },
    async patchTrain(p: Principal, plantId: number, trainId: number, input: TrainPatch): Promise<TrainOut> {
      await requirePlant(p, plantId);
      return repo.transaction(async (r) => {
        await unitOrThrow(await r.train(plantId, trainId), 'train', trainId);
        if (input.code) await assertFreeCode(r, plantId, 'train', input.code, trainId);
        const t = await r.updateTrain(trainId, input);
        await r.audit(p, 'train.update', `train:${trainId}`, { plantId, ...input });
        return { id: t.id, code: t.code, name: t.name };
      });
    },
    async removeTrain(p: Principal, plantId: number, trainId: number): Promise<{ deleted: true }> {
      await requirePlant(p, plantId);
      return repo.transaction(async (r) => {
        const t = await unitOrThrow(await r.train(plantId, trainId), 'train', trainId);
        const m = await r.model(plantId);
        for (const b of m.basins.filter((x) => x.trainId === trainId)) await r.deleteUnit('basin', b.id);
        for (const c of m.clarifiers.filter((x) => x.trainId === trainId)) await r.deleteUnit('clarifier', c.id);
        for (const x of m.pumps.filter((u) => u.trainId === trainId)) await r.deleteUnit('pump', x.id);
        await r.deleteMappingsOf('train', trainId);
        await r.deleteTrain(trainId);
        await r.audit(p, 'train.delete', `train:${trainId}`, { plantId, code: t.code });
        return { deleted: true as const };
      });
    },

    // ---- basins ----
    async createBasin(p: Principal, plantId: number, input: BasinCreate) {
      const plant = await requirePlant(p, plantId);
      const id = await repo.transaction(async (r) => {
        await requireTrain(r, plantId, input.trainId);
        await assertFreeCode(r, plantId, 'basin', input.code);
        const b = await r.insertBasin({ trainId: input.trainId, code: input.code, name: input.name });
        const v = { effectiveFrom: effective(input.effectiveFrom), volume_m3: input.volume_m3, aeratedFraction: input.aeratedFraction ?? 1, sideWaterDepth_m: input.sideWaterDepth_m ?? null, inService: input.inService ?? true };
        await r.putBasinVersion(b.id, v);
        await r.audit(p, 'basin.create', `basin:${b.id}`, { plantId, ...input });
        return b.id;
      });
      return unitOut(plant, 'basin', id);
    },
    async patchBasin(p: Principal, plantId: number, basinId: number, input: BasinPatch) {
      const plant = await requirePlant(p, plantId);
      await repo.transaction(async (r) => {
        const b = await unitOrThrow(await r.basin(plantId, basinId), 'basin', basinId);
        if (input.trainId !== undefined) await requireTrain(r, plantId, input.trainId);
        if (input.code) await assertFreeCode(r, plantId, 'basin', input.code, basinId);
        await r.updateBasin(b.id, pickDefined(input, ['trainId', 'code', 'name'] as const));
        const geom = pickDefined(input, ['volume_m3', 'aeratedFraction', 'sideWaterDepth_m', 'inService'] as const);
        if (Object.keys(geom).length) {
          const ef = effective(input.effectiveFrom);
          const base = versionAt((await r.model(plantId)).basins.find((x) => x.id === basinId)!.versions, ef);
          await r.putBasinVersion(basinId, { volume_m3: base?.volume_m3 ?? 0, aeratedFraction: base?.aeratedFraction ?? 1, sideWaterDepth_m: base?.sideWaterDepth_m ?? null, inService: base?.inService ?? true, ...geom, effectiveFrom: ef });
        }
        await r.audit(p, 'basin.update', `basin:${basinId}`, { plantId, ...input });
      });
      return unitOut(plant, 'basin', basinId);
    },

    // ---- clarifiers ----
    async createClarifier(p: Principal, plantId: number, input: ClarifierCreate) {
      const plant = await requirePlant(p, plantId);
      const id = await repo.transaction(async (r) => {
        await requireTrain(r, plantId, input.trainId);
        await assertFreeCode(r, plantId, 'clarifier', input.code);
        const c = await r.insertClarifier({ trainId: input.trainId, code: input.code, name: input.name });
        await r.putClarifierVersion(c.id, { effectiveFrom: effective(input.effectiveFrom), area_m2: input.area_m2, sideWaterDepth_m: input.sideWaterDepth_m, feedDepth_m: input.feedDepth_m ?? null, count: input.count ?? 1, inService: input.inService ?? true });
        await r.audit(p, 'clarifier.create', `clarifier:${c.id}`, { plantId, ...input });
        return c.id;
      });
      return unitOut(plant, 'clarifier', id);
    },
    async patchClarifier(p: Principal, plantId: number, clarifierId: number, input: ClarifierPatch) {
      const plant = await requirePlant(p, plantId);
      await repo.transaction(async (r) => {
        await unitOrThrow(await r.clarifier(plantId, clarifierId), 'clarifier', clarifierId);
        if (input.trainId !== undefined) await requireTrain(r, plantId, input.trainId);
        if (input.code) await assertFreeCode(r, plantId, 'clarifier', input.code, clarifierId);
        await r.updateClarifier(clarifierId, pickDefined(input, ['trainId', 'code', 'name'] as const));
        const geom = pickDefined(input, ['area_m2', 'sideWaterDepth_m', 'feedDepth_m', 'count', 'inService'] as const);
        if (Object.keys(geom).length) {
          const ef = effective(input.effectiveFrom);
          const base = versionAt((await r.model(plantId)).clarifiers.find((x) => x.id === clarifierId)!.versions, ef);
          if (!base && (geom.area_m2 === undefined || geom.sideWaterDepth_m === undefined)) throw new ValidationError({ area_m2: ['a clarifier needs its area and side water depth'] });
          await r.putClarifierVersion(clarifierId, { area_m2: base?.area_m2 ?? 0, sideWaterDepth_m: base?.sideWaterDepth_m ?? 0, feedDepth_m: base?.feedDepth_m ?? null, count: base?.count ?? 1, inService: base?.inService ?? true, ...geom, effectiveFrom: ef });
        }
        await r.audit(p, 'clarifier.update', `clarifier:${clarifierId}`, { plantId, ...input });
      });
      return unitOut(plant, 'clarifier', clarifierId);
    },

    // ---- pumps ----
    async createPump(p: Principal, plantId: number, input: PumpCreate) {
      const plant = await requirePlant(p, plantId);
      const id = await repo.transaction(async (r) => {
        const clar = input.clarifierId ? await requirePumpClarifier(r, plantId, input.clarifierId) : null;
        const trainId = input.trainId ?? clar!.trainId;
        await requireTrain(r, plantId, trainId);
        if (clar && clar.trainId !== trainId) throw new ValidationError({ clarifierId: [`clarifier ${clar.code} is in another train than train ${trainId}`] });
        await assertFreeCode(r, plantId, 'pump', input.code);
        const x = await r.insertPump({ trainId, code: input.code, name: input.name, kind: input.kind, clarifierId: clar?.id ?? null });
        await r.putPumpVersion(x.id, { effectiveFrom: effective(input.effectiveFrom), capacity_m3h: input.capacity_m3h, inService: input.inService ?? true });
        await r.audit(p, 'pump.create', `pump:${x.id}`, { plantId, ...input });
        return x.id;
      });
      return unitOut(plant, 'pump', id);
    },
    async patchPump(p: Principal, plantId: number, pumpId: number, input: PumpPatch) {
      const plant = await requirePlant(p, plantId);
      await repo.transaction(async (r) => {
        const x = await unitOrThrow(await r.pump(plantId, pumpId), 'pump', pumpId);
        const clar = input.clarifierId ? await requirePumpClarifier(r, plantId, input.clarifierId) : null;
        const trainId = input.trainId ?? clar?.trainId ?? x.trainId;
        if (input.trainId !== undefined) await requireTrain(r, plantId, input.trainId);
        const clarifierId = input.clarifierId === undefined ? x.clarifierId : input.clarifierId;
        if (clarifierId !== null) {
          const c = clar ?? (await r.clarifier(plantId, clarifierId));
          if (c && c.trainId !== trainId) throw new ValidationError({ clarifierId: [`clarifier ${c.code} is in another train than train ${trainId}`] });
        }
        if (input.code) await assertFreeCode(r, plantId, 'pump', input.code, pumpId);
        await r.updatePump(pumpId, { ...pickDefined(input, ['code', 'name', 'kind'] as const), ...(trainId !== x.trainId ? { trainId } : {}), ...(input.clarifierId !== undefined ? { clarifierId: input.clarifierId } : {}) });
        const geom = pickDefined(input, ['capacity_m3h', 'inService'] as const);
        if (Object.keys(geom).length) {
          const ef = effective(input.effectiveFrom);
          const base = versionAt((await r.model(plantId)).pumps.find((u) => u.id === pumpId)!.versions, ef);
          await r.putPumpVersion(pumpId, { capacity_m3h: base?.capacity_m3h ?? 0, inService: base?.inService ?? true, ...geom, effectiveFrom: ef });
        }
        await r.audit(p, 'pump.update', `pump:${pumpId}`, { plantId, ...input });
      });
      return unitOut(plant, 'pump', pumpId);
    },

    /** Deletes a basin, clarifier or pump with its geometry history and signal mappings (taking it out of service keeps them). */
    async removeUnit(p: Principal, plantId: number, kind: UnitKind, id: number): Promise<{ deleted: true }> {
      await requirePlant(p, plantId);
      return repo.transaction(async (r) => {
        const u = kind === 'basin' ? await r.basin(plantId, id) : kind === 'clarifier' ? await r.clarifier(plantId, id) : await r.pump(plantId, id);
        await unitOrThrow(u, kind, id);
        await r.deleteUnit(kind, id);
        await r.audit(p, `${kind}.delete`, `${kind}:${id}`, { plantId, code: u!.code });
        return { deleted: true as const };
      });
    },

  };
}
export type PlantModelService = ReturnType<typeof createPlantModelService>;
