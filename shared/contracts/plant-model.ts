import { z } from 'zod';

/**
 * Plant model API (`/api/v1/plants`, `/api/v1/plants/:plantId/{trains,basins,clarifiers,pumps}`):
 * an integrator describes a plant — trains, aeration basins, secondary clarifiers, RAS and WAS
 * pumps — and edits it later.
 *
 * Geometry is effective-dated. Every geometry field (volume, aerated fraction, area, depths,
 * count, capacity, in service) is kept per unit as versions; a change applies from
 * `effectiveFrom` (default: now) and balances of the past keep the geometry that held then. The
 * first version of a unit also holds for all earlier times. Taking a clarifier out of service
 * for a month is two edits: `inService: false` from t1, `inService: true` from t2.
 *
 * Everything is SI (m³, m², m, m³/h); a plant's `unitSystem` changes only what the monitor and
 * the CSV exports display.
 */

const id = (what: string) => z.coerce.number().int().positive().max(2_147_483_647).meta({ description: what });
const isoIn = (description: string) => z.iso.datetime({ offset: true }).meta({ description });

/** Codes identify units in signal maps and configuration documents: short, lower case, stable. */
export const unitCode = z.string().regex(/^[a-z0-9][a-z0-9_-]{0,31}$/, 'lower-case letters, digits, - or _ (at most 32)');
export const unitName = z.string().trim().min(1).max(120);

/** True for an IANA time zone name the runtime knows (ECMA-402 IsValidTimeZoneName). */
export function isIanaTimeZone(tz: string): boolean {
  try {
    new Intl.DateTimeFormat('en', { timeZone: tz });
    return true;
  } catch {
    return false;
  }
}
export const timeZone = z.string().min(1).max(64).refine(isIanaTimeZone, 'not an IANA time zone (e.g. Europe/Berlin, America/Chicago, UTC)').meta({ description: 'IANA time zone of the plant (shift summaries, day boundaries)' });

export const UNIT_SYSTEMS = ['SI', 'US'] as const;
export const unitSystem = z.enum(UNIT_SYSTEMS).meta({ description: 'display units: SI (default) or US customary (MGD/gpm, ft, ft², lb, mg/L); storage and the API stay SI' });
export type UnitSystem = z.infer<typeof unitSystem>;

const positive = (what: string) => z.number().positive(`${what} must be greater than 0`);
const nonNegative = (what: string) => z.number().min(0, `${what} must not be negative`);
export const volume_m3 = positive('volume').max(10_000_000).meta({ description: 'basin volume [m³]' });
export const aeratedFraction = z.number().min(0, 'aerated fraction must be between 0 and 1').max(1, 'aerated fraction must be between 0 and 1').meta({ description: 'aerated share of the volume, 0–1 (1 = fully aerobic), for the aerobic SRT' });
export const area_m2 = positive('area').max(1_000_000).meta({ description: 'surface area of one clarifier [m²]' });
export const depth_m = positive('depth').max(100);
export const capacity_m3h = nonNegative('capacity').max(1_000_000).meta({ description: 'pump capacity [m³/h]' });
export const peakFlow_m3h = positive('peak flow').max(10_000_000).meta({ description: 'peak wet-weather flow [m³/h] for the storm projection' });

export const plantParams = z.object({ plantId: id('plant id') }).strict();
export const trainParams = z.object({ plantId: id('plant id'), trainId: id('train id') }).strict();
export const basinParams = z.object({ plantId: id('plant id'), basinId: id('basin id') }).strict();
export const clarifierParams = z.object({ plantId: id('plant id'), clarifierId: id('clarifier id') }).strict();
export const pumpParams = z.object({ plantId: id('plant id'), pumpId: id('pump id') }).strict();

// ---- plants ----
export const plantCreate = z
  .object({
    // Lets POST /plants tell a plain create from a configuration document (formatVersion 1).
    formatVersion: z.undefined().optional(),
    code: unitCode.meta({ description: 'short code, unique among plants' }),
    name: unitName,
    timezone: timeZone,
    peakFlow_m3h: peakFlow_m3h.nullable().optional(),
    unitSystem: unitSystem.optional(),
  })
  .strict()
  .meta({ id: 'PlantCreate' });
export type PlantCreate = z.infer<typeof plantCreate>;

export const plantPatch = z
  .object({
    code: unitCode.optional(),
    name: unitName.optional(),
    timezone: timeZone.optional(),
    peakFlow_m3h: peakFlow_m3h.nullable().optional(),
    unitSystem: unitSystem.optional(),
    retiredAt: isoIn('retire the plant from this time (history stays; the engine stops computing it); null brings it back').nullable().optional(),
  })
  .strict()
  .refine((p) => Object.keys(p).length > 0, { message: 'nothing to change' })
  .meta({ id: 'PlantPatch' });
export type PlantPatch = z.infer<typeof plantPatch>;

export const plantDeleteQuery = z
  .object({ force: z.enum(['0', '1']).optional().meta({ description: '1 deletes a plant that has samples, with all its history' }) })
  .strict();

export const plantOut = z
  .object({
    id: z.number().int(),
    code: z.string(),
    name: z.string(),
    timezone: z.string(),
    peakFlow_m3h: z.number().nullable(),
    unitSystem: unitSystem,
    retiredAt: z.string().nullable(),
    createdAt: z.string(),
  })
  .meta({ id: 'Plant' });
export type PlantOut = z.infer<typeof plantOut>;

// ---- units ----
const effectiveFrom = isoIn('the change applies from this time (default: now); earlier balances keep the geometry that held then').optional();
const inService = z.boolean().meta({ description: 'false takes the unit out of the layout from effectiveFrom' });

export const trainCreate = z.object({ code: unitCode, name: unitName }).strict().meta({ id: 'TrainCreate' });
export const trainPatch = z
  .object({ code: unitCode.optional(), name: unitName.optional() })
  .strict()
  .refine((p) => Object.keys(p).length > 0, { message: 'nothing to change' });
export type TrainCreate = z.infer<typeof trainCreate>;
export type TrainPatch = z.infer<typeof trainPatch>;

export const basinGeometry = z.object({ volume_m3, aeratedFraction, sideWaterDepth_m: depth_m.nullable().optional(), inService: inService.optional() }).strict();
export const basinCreate = z
  .object({ trainId: id('train the basin belongs to'), code: unitCode, name: unitName, volume_m3, aeratedFraction: aeratedFraction.optional().meta({ description: 'default 1 (fully aerobic)' }), sideWaterDepth_m: depth_m.nullable().optional(), inService: inService.optional(), effectiveFrom })
  .strict()
  .meta({ id: 'BasinCreate' });
export const basinPatch = z
  .object({ trainId: id('move to this train').optional(), code: unitCode.optional(), name: unitName.optional(), volume_m3: volume_m3.optional(), aeratedFraction: aeratedFraction.optional(), sideWaterDepth_m: depth_m.nullable().optional(), inService: inService.optional(), effectiveFrom })
  .strict()
  .refine((p) => Object.keys(p).some((k) => k !== 'effectiveFrom'), { message: 'nothing to change' })
  .meta({ id: 'BasinPatch' });
export type BasinCreate = z.infer<typeof basinCreate>;
export type BasinPatch = z.infer<typeof basinPatch>;

export const clarifierCreate = z
  .object({
    trainId: id('train the clarifier belongs to'),
    code: unitCode,
    name: unitName,
    area_m2,
    sideWaterDepth_m: depth_m.meta({ description: 'side water depth [m]' }),
    feedDepth_m: depth_m.nullable().optional().meta({ description: 'depth of the feed well outlet below the surface [m]' }),
    count: z.number().int().min(1).max(100).optional().meta({ description: 'identical clarifiers described by this row (default 1)' }),
    inService: inService.optional(),
    effectiveFrom,
  })
  .strict()
  .meta({ id: 'ClarifierCreate' });
export const clarifierPatch = z
  .object({
    trainId: id('move to this train').optional(),
    code: unitCode.optional(),
    name: unitName.optional(),
    area_m2: area_m2.optional(),
    sideWaterDepth_m: depth_m.optional(),
    feedDepth_m: depth_m.nullable().optional(),
    count: z.number().int().min(1).max(100).optional(),
    inService: inService.optional(),
    effectiveFrom,
  })
  .strict()
  .refine((p) => Object.keys(p).some((k) => k !== 'effectiveFrom'), { message: 'nothing to change' })
  .meta({ id: 'ClarifierPatch' });
export type ClarifierCreate = z.infer<typeof clarifierCreate>;
export type ClarifierPatch = z.infer<typeof clarifierPatch>;

export const PUMP_KINDS = ['ras', 'was'] as const;
export const pumpCreate = z
  .object({
    kind: z.enum(PUMP_KINDS).meta({ description: 'ras (return activated sludge) or was (waste activated sludge)' }),
    code: unitCode,
    name: unitName,
    capacity_m3h,
    trainId: id('train the pump serves (default: the train of clarifierId)').optional(),
    clarifierId: id('clarifier the pump draws from (same plant)').nullable().optional(),
    inService: inService.optional(),
    effectiveFrom,
  })
  .strict()
  .refine((p) => p.trainId !== undefined || (p.clarifierId ?? null) !== null, { message: 'name the train or the clarifier the pump serves', path: ['trainId'] })
  .meta({ id: 'PumpCreate' });
export const pumpPatch = z
  .object({
    kind: z.enum(PUMP_KINDS).optional(),
    code: unitCode.optional(),
    name: unitName.optional(),
    capacity_m3h: capacity_m3h.optional(),
    trainId: id('move to this train').optional(),
    clarifierId: id('clarifier the pump draws from (same plant); null = the train as a whole').nullable().optional(),
    inService: inService.optional(),
    effectiveFrom,
  })
  .strict()
  .refine((p) => Object.keys(p).some((k) => k !== 'effectiveFrom'), { message: 'nothing to change' })
  .meta({ id: 'PumpPatch' });
export type PumpCreate = z.infer<typeof pumpCreate>;
export type PumpPatch = z.infer<typeof pumpPatch>;

// ---- the model as answered ----
const versionBase = { effectiveFrom: z.string().meta({ description: 'ISO 8601; the first version also holds for all earlier times' }), inService: z.boolean() };
export const basinVersionOut = z.object({ ...versionBase, volume_m3: z.number(), aeratedFraction: z.number(), sideWaterDepth_m: z.number().nullable() });
export const clarifierVersionOut = z.object({ ...versionBase, area_m2: z.number(), sideWaterDepth_m: z.number(), feedDepth_m: z.number().nullable(), count: z.number().int() });
export const pumpVersionOut = z.object({ ...versionBase, capacity_m3h: z.number() });
export type BasinVersion = z.infer<typeof basinVersionOut>;
export type ClarifierVersion = z.infer<typeof clarifierVersionOut>;
export type PumpVersion = z.infer<typeof pumpVersionOut>;

export const basinOut = basinVersionOut.extend({ id: z.number().int(), trainId: z.number().int(), code: z.string(), name: z.string(), history: z.array(basinVersionOut) }).meta({ id: 'Basin' });
export const clarifierOut = clarifierVersionOut.extend({ id: z.number().int(), trainId: z.number().int(), code: z.string(), name: z.string(), history: z.array(clarifierVersionOut) }).meta({ id: 'Clarifier' });
export const pumpOut = pumpVersionOut
  .extend({ id: z.number().int(), trainId: z.number().int(), clarifierId: z.number().int().nullable(), code: z.string(), name: z.string(), kind: z.enum(PUMP_KINDS), history: z.array(pumpVersionOut) })
  .meta({ id: 'Pump' });
export const trainOut = z.object({ id: z.number().int(), code: z.string(), name: z.string() }).meta({ id: 'Train' });
export type BasinOut = z.infer<typeof basinOut>;
export type ClarifierOut = z.infer<typeof clarifierOut>;
export type PumpOut = z.infer<typeof pumpOut>;
export type TrainOut = z.infer<typeof trainOut>;

export const modelQuery = z.object({ at: isoIn('geometry valid at this time (default: now)').optional() }).strict();
export const plantModelOut = z
  .object({
    plant: plantOut,
    at: z.string().meta({ description: 'the time the geometry fields describe' }),
    trains: z.array(
      trainOut.extend({
        basins: z.array(basinOut),
        clarifiers: z.array(clarifierOut),
        pumps: z.array(pumpOut),
      }),
    ),
  })
  .meta({ id: 'PlantModel', description: 'every unit with its geometry at `at` (inService false when it is out of service then) and its full geometry history' });
export type PlantModelOut = z.infer<typeof plantModelOut>;

export const deletedOut = z.object({ deleted: z.literal(true) });
