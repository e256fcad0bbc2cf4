import { z } from 'zod';
import { SETTLING_CORRELATIONS } from '../domain/settling.js';
import { MLSS_RANGE_gL, settleabilityIssues } from '../domain/settleability.js';

/**
 * Request and response schemas of the stateless calculators (`POST /api/v1/calc/*`).
 *
 * Units are in every field name (m3h = m³/h, gL = g/L = kg/m³, mLg = mL/g, mLL = mL/L,
 * m2, m3, m, kg, d, kgm2h = kg/(m²·h), mh = m/h, Lg = L/g) and in each field's description.
 * Requests are strict: unknown keys are rejected. Physical bounds (chosen to cover every
 * plausible plant while catching unit mistakes — e.g. MLSS typed in mg/L):
 *
 * | quantity | bound |
 * |---|---|
 * | flows (influent, RAS, WAS, storm, effluent, settler feed/underflow) | 0 … 1 000 000 m³/h (zero allowed; results that need a flow become null) |
 * | clarifier / settler area | > 0 … 1 000 000 m² |
 * | aeration volume | > 0 … 10 000 000 m³ |
 * | MLSS | 0.1 … 20 g/L (plausibility; the lab's bounds too) |
 * | settler feed TSS | 0 … 30 g/L; WAS TSS 0 … 50 g/L; effluent TSS 0 … 5 g/L |
 * | SVI / SSVI | 20 … 1000 mL/g |
 * | settled volume | > 0 … 1000 mL/L (1 L cylinder); dilution factor 1 … 100; the resulting SVI/DSVI/SSVI 20 … 1000 mL/g |
 * | rule-of-thumb factor X_R,max·SVI | 500 … 2000 mL/L (default 1200) |
 * | Vesilind v0 | > 0 … 50 m/h; k > 0 … 5 L/g |
 * | masses | 0 … 1e9 kg; target SRT > 0 … 200 d |
 * | settler depth | > 0 … 20 m; layers 2 … 100 (integer), feed layer 1 … layers |
 *
 * Responses: a value that cannot be computed is `null` (never NaN); every response carries the
 * advisory `caution` the balance carries (OPERATOR_CAUTION) and may additionally carry `quality` ('good' | 'estimated' | 'unavailable', the worst over its figures)
 * and `reasons` (why any figure is estimated or null).
 */

const num = (description: string) => z.number().meta({ description });
const flow = (what: string) => num(`${what} [m³/h]`).min(0).max(1_000_000);
// Cross-field refinements also run when a field already failed; they stay silent then, so each
// problem is reported once, under its own field.
const validFlows = (...xs: unknown[]): boolean => xs.every((x) => typeof x === 'number' && Number.isFinite(x) && x >= 0);
const nullableNum = (description: string) => z.number().nullable().meta({ description });

export const qualityEnum = z.enum(['good', 'estimated', 'unavailable']).meta({ description: 'worst quality over the response figures' });
const qualityFields = {
  caution: z.string().meta({ description: 'advisory caution: the licensed operator decides' }),
  quality: qualityEnum.optional(),
  reasons: z.array(z.string()).optional().meta({ description: 'why a figure is estimated or null' }),
};

const mlss = num('mixed-liquor suspended solids MLSS [g/L]').min(MLSS_RANGE_gL.min).max(MLSS_RANGE_gL.max);
const svi = num('sludge volume index SVI [mL/g]').min(20).max(1000);
const area = num('clarifier surface area [m²]').positive().max(1_000_000);
const mass = (what: string) => num(`${what} [kg]`).min(0).max(1e9);

// ---- storm ----
export const stormRequest = z
  .object({
    influentFlow_m3h: flow('present influent flow Q'),
    rasFlow_m3h: flow('return sludge flow Q_R, held (capped) during the storm'),
    mlss_gL: mlss,
    svi_mLg: svi,
    aerationVolume_m3: num('aeration volume V [m³]').positive().max(10_000_000),
    clarifierArea_m2: area,
    stormFlow_m3h: flow('storm influent flow'),
    xrFactor: num('rule-of-thumb factor for X_R,max = factor/SVI [mL/L]; default 1200').min(500).max(2000).optional(),
    clarifierMass_kg: mass('sludge already in the clarifiers before the storm').optional(),
  })
  .strict()
  .meta({ id: 'StormRequest', description: 'Storm projection with the return flow capped' });

export const stormCheck = z
  .object({
    rule: z.enum(['min-mlss', 'max-stored-fraction', 'max-blanket-rise']),
    ok: z.boolean(),
    value: num('checked value (g/L, fraction or m, by rule)'),
    limit: num('limit of the rule (g/L, fraction or m, by rule)'),
  })
  .strict();

export const stormResponse = z
  .object({
    rasConcRequired_gL: nullableNum('required return concentration X·(Q+Q_R)/Q_R at the present flow [g/L]'),
    stormRasConcRequired_gL: nullableNum('required return concentration at the storm flow [g/L]'),
    rasConcMax_gL: nullableNum('maximum return concentration factor/SVI [g/L]'),
    minRecycleRatio: nullableNum('minimum return ratio X/(X_R,max − X) [-]'),
    minRasFlow_m3h: nullableNum('minimum return flow at the storm flow, Q_storm·R_min [m³/h]'),
    equilibriumMlss_gL: nullableNum('MLSS at the storm equilibrium X_R,max·Q_R/(Q_storm+Q_R) [g/L]'),
    sludgeToClarifiers_kg: nullableNum('sludge moved to the clarifiers (X − X′)·V [kg]'),
    blanketVolume_m3: nullableNum('blanket volume of the moved sludge, mass·SVI [m³]'),
    blanketRise_m: nullableNum('blanket rise = blanket volume / clarifier area [m]'),
    storedFraction: nullableNum('fraction of the inventory in the clarifiers after the storm [-]'),
    checks: z.array(stormCheck),
    ...qualityFields,
  })
  .strict()
  .meta({ id: 'StormResponse' });

// ---- state point ----
export const settlingVesilind = z
  .object({ v0_mh: num('Vesilind v0 [m/h]').positive().max(50), k_Lg: num('Vesilind k [L/g]').positive().max(5) })
  .strict();
export const settlingCorrelation = z
  .object({
    svi_mLg: num('SVI [mL/g] (the stirred SSVI3.5 for wahlberg-keinath-1988)').min(20).max(1000),
    correlation: z.enum(SETTLING_CORRELATIONS).meta({ description: 'published SVI/SSVI → Vesilind correlation' }),
  })
  .strict();

export const statePointRequest = z
  .object({
    influentFlow_m3h: flow('influent flow Q'),
    rasFlow_m3h: flow('return sludge flow Q_R'),
    wasFlow_m3h: flow('waste sludge flow Q_W drawn from the underflow').optional(),
    mlss_gL: mlss,
    clarifierArea_m2: area,
    settling: z.union([settlingVesilind, settlingCorrelation]).meta({ description: 'Vesilind parameters, given or from a correlation' }),
  })
  .strict()
  .refine((r) => !validFlows(r.influentFlow_m3h, r.wasFlow_m3h ?? 0) || (r.wasFlow_m3h ?? 0) <= r.influentFlow_m3h, { message: 'waste flow cannot exceed influent flow', path: ['wasFlow_m3h'] })
  .meta({ id: 'StatePointRequest' });

export const statePointResponse = z
  .object({
    overflowRate_mh: nullableNum('surface overflow rate (Q − Q_W)/A [m/h]'),
    solidsLoading_kgm2h: nullableNum('solids loading (Q+Q_R)·X/A [kg/(m²·h)]'),
    underflowRate_mh: nullableNum('underflow velocity (Q_R+Q_W)/A [m/h]'),
    limitingFlux_kgm2h: nullableNum('limiting solids flux G_L [kg/(m²·h)]'),
    limitingConc_gL: nullableNum('limiting concentration X_L [g/L]'),
    maxUnderflowConc_gL: nullableNum('maximum underflow concentration G_L/u [g/L]'),
    requiredUnderflowConc_gL: nullableNum('required underflow concentration (Q+Q_R)·X/(Q_R+Q_W) [g/L]'),
    thickeningMargin: nullableNum('1 − SLR/G_L [-]'),
    clarificationMargin: nullableNum('1 − SOR/vs(X) [-]'),
    settling: z
      .object({
        v0_mh: nullableNum('Vesilind v0 used [m/h]'),
        k_Lg: nullableNum('Vesilind k used [L/g]'),
        source: z.string().meta({ description: "'given' or the correlation id" }),
      })
      .strict(),
    ...qualityFields,
  })
  .strict()
  .meta({ id: 'StatePointResponse' });

// ---- settler ----
export const takacsSchema = z
  .object({
    v0Max_mh: num("Takács maximum practical settling velocity v0' [m/h]").positive().max(100),
    v0_mh: num('Takács maximum Vesilind velocity v0 [m/h]').positive().max(200),
    rh_Lg: num('hindered-zone parameter rh [L/g]').positive().max(20),
    rp_Lg: num('flocculant-zone parameter rp [L/g]').positive().max(100),
    fns: num('non-settleable fraction [-]').min(0).max(0.2),
    xt_gL: num('clarification threshold Xt [g/L]').positive().max(30),
  })
  .strict();

export const settlerRequest = z
  .object({
    feedFlow_m3h: flow('settler feed flow Q_f'),
    feedTss_gL: num('feed TSS [g/L]').min(0).max(30),
    underflowFlow_m3h: flow('underflow Q_u'),
    area_m2: area,
    depth_m: num('settler depth [m]').positive().max(20),
    layers: z.number().int().min(2).max(100).optional().meta({ description: 'number of layers; default 10' }),
    feedLayer: z.number().int().min(1).max(100).optional().meta({ description: 'feed layer, 1-based from the top; default 5' }),
    takacs: takacsSchema.optional().meta({ description: 'Takács parameters; default BSM1' }),
  })
  .strict()
  .refine((r) => !validFlows(r.underflowFlow_m3h, r.feedFlow_m3h) || r.underflowFlow_m3h <= r.feedFlow_m3h, { message: 'underflow cannot exceed the feed flow', path: ['underflowFlow_m3h'] })
  .refine((r) => !Number.isInteger(r.feedLayer ?? 5) || !Number.isInteger(r.layers ?? 10) || (r.feedLayer ?? 5) <= (r.layers ?? 10), { message: 'feed layer must not exceed the number of layers', path: ['feedLayer'] })
  .meta({ id: 'SettlerRequest' });

export const settlerResponse = z
  .object({
    layers_gL: z.array(z.number()).meta({ description: 'layer TSS top to bottom [g/L]' }),
    effluentTss_gL: nullableNum('effluent TSS = top layer [g/L]'),
    underflowTss_gL: nullableNum('underflow TSS = bottom layer [g/L]'),
    blanketHeight_m: nullableNum('blanket top above the floor at the 3 g/L threshold (BSM1 Xt) [m]'),
    ...qualityFields,
  })
  .strict()
  .meta({ id: 'SettlerResponse' });

// ---- SRT ----
export const srtRequest = z
  .object({
    aerationMass_kg: mass('solids in the aeration tanks'),
    clarifierMass_kg: mass('solids in the clarifiers'),
    wasFlow_m3h: flow('waste sludge flow Q_W'),
    wasTss_gL: num('waste sludge TSS X_W [g/L]').min(0).max(50),
    effluentFlow_m3h: flow('effluent flow Q_e'),
    effluentTss_gL: num('effluent TSS X_e [g/L]').min(0).max(5),
    targetSrt_d: num('target SRT for the WAS advisor [d]').positive().max(200).optional(),
  })
  .strict()
  .meta({ id: 'SrtRequest' });

export const srtResponse = z
  .object({
    srtTotal_d: nullableNum('total SRT (aeration + clarifier mass) [d]'),
    srtAeration_d: nullableNum('aeration-only SRT [d]'),
    wasFlowForTarget_m3h: nullableNum('WAS flow that holds the target SRT (total inventory) [m³/h]').optional(),
    ...qualityFields,
  })
  .strict()
  .meta({ id: 'SrtResponse' });

// ---- SVI ----
export const settleabilityKindEnum = z.enum(['SVI', 'DSVI', 'SSVI']);

export const sviRequest = z
  .object({
    settledVolume_mLL: num('settled volume after 30 min [mL/L] (of the diluted sample for a DSVI)').positive().max(1000),
    mlss_gL: mlss,
    dilutionFactor: num('dilution factor ≥ 1 (total volume / sludge volume)').min(1).max(100).optional(),
    kind: settleabilityKindEnum.optional().meta({ description: 'test kind; inferred (DSVI when diluted) if omitted' }),
  })
  .strict()
  .superRefine((r, ctx) => {
    // range issues are already reported by the field schemas; add only the test rules (e.g. "dilute and repeat")
    for (const issue of settleabilityIssues(r)) if (!issue.range) ctx.addIssue({ code: 'custom', message: issue.message, path: [issue.field] });
  })
  .meta({ id: 'SviRequest' });

export const sviResponse = z
  .object({ svi_mLg: nullableNum('settleability index [mL/g]'), kind: settleabilityKindEnum, ...qualityFields })
  .strict()
  .meta({ id: 'SviResponse' });

// ---- storm timeline ----
export const hydrographPoint = z.object({ t_h: num('time from the start of the storm [h]').min(0).max(8760), flow_m3h: flow('influent flow at that time') }).strict();

export const stormTimelineRequest = stormRequest
  .extend({
    hydrograph: z.array(hydrographPoint).min(2).max(10_000).meta({ description: 'influent flow in time, linear between points; two points at the same time make a step' }),
    clarifierDepth_m: num('side-water depth of the clarifiers [m]').positive().max(20),
    blanketNow_m: num('blanket level before the storm [m above the floor]').min(0).max(20).optional(),
  })
  .strict()
  .superRefine((r, ctx) => {
    for (let i = 1; i < (r.hydrograph?.length ?? 0); i++) {
      const a = r.hydrograph[i - 1]!.t_h;
      const b = r.hydrograph[i]!.t_h;
      if (Number.isFinite(a) && Number.isFinite(b) && b < a) {
        ctx.addIssue({ code: 'custom', message: 'hydrograph times must not decrease', path: ['hydrograph', i, 't_h'] });
        return;
      }
    }
    if (r.hydrograph?.length >= 2 && !(r.hydrograph[r.hydrograph.length - 1]!.t_h > r.hydrograph[0]!.t_h)) ctx.addIssue({ code: 'custom', message: 'the hydrograph must span some time', path: ['hydrograph'] });
    if (typeof r.blanketNow_m === 'number' && typeof r.clarifierDepth_m === 'number' && r.blanketNow_m > r.clarifierDepth_m) {
      ctx.addIssue({ code: 'custom', message: 'blanket level above the clarifier surface: check the detector and the depth', path: ['blanketNow_m'] });
    }
  })
  .meta({ id: 'StormTimelineRequest', description: 'Storm projection in time over a hydrograph' });

export const stormTimelineCheck = z
  .object({
    rule: z.enum(['min-mlss', 'max-stored-fraction', 'max-blanket-rise', 'blanket-below-surface']),
    ok: z.boolean(),
    value: num('worst value over the storm (g/L, fraction or m, by rule)'),
    limit: num('limit of the rule (g/L, fraction or m, by rule)'),
    firstFailed_h: nullableNum('first time the rule failed [h]; null if it held'),
  })
  .strict();

export const stormTimelineResponse = z
  .object({
    points: z.array(
      z
        .object({
          t_h: num('time [h]'),
          mlss_gL: num('basin MLSS [g/L]'),
          clarifierMass_kg: num('sludge in the clarifiers [kg]'),
          blanket_m: num('blanket level above the floor, capped at the surface [m]'),
          rasConcRequired_gL: nullableNum('X·(Q+Q_R)/Q_R at that time [g/L]'),
        })
        .strict(),
    ),
    peakBlanket_m: nullableNum('highest blanket level over the storm [m]'),
    blanketReachesSurface_h: nullableNum('first time the blanket reaches the clarifier surface [h]; null if never'),
    firstFailure_h: nullableNum('first time any check failed [h]; null if none did'),
    rasConcMax_gL: nullableNum('X_R,max used, factor/SVI [g/L]'),
    equilibriumMlss_gL: nullableNum('equilibrium MLSS at stormFlow_m3h held long (the storm calculator) [g/L]'),
    checks: z.array(stormTimelineCheck),
    ...qualityFields,
  })
  .strict()
  .meta({ id: 'StormTimelineResponse' });

// ---- dynamic SRT ----
export const dynamicSrtPoint = z
  .object({
    t_h: num('time of the point [h], any origin; strictly increasing').min(-1e6).max(1e6),
    inventory_kg: num('sludge inventory M (aeration + clarifiers) [kg]').positive().max(1e9),
    wasted_kgh: num('solids removal W = Q_W·X_W + Q_e·X_e (wasting and effluent, not the production) [kg/h]').min(0).max(1e7),
  })
  .strict();

export const dynamicSrtRequest = z
  .object({
    points: z.array(dynamicSrtPoint).min(1).max(100_000).meta({ description: 'inputs, taken linear between points' }),
    initialSrt_d: num('sludge age at the first point [d]').min(0).max(1000),
  })
  .strict()
  .superRefine((r, ctx) => {
    for (let i = 1; i < r.points.length; i++) {
      const a = r.points[i - 1]!.t_h;
      const b = r.points[i]!.t_h;
      if (Number.isFinite(a) && Number.isFinite(b) && !(b > a)) {
        ctx.addIssue({ code: 'custom', message: 't_h must increase strictly from point to point', path: ['points', i, 't_h'] });
        return;
      }
    }
  })
  .meta({ id: 'DynamicSrtRequest', description: 'Dynamic SRT on the age balance d(M·θ)/dt = M − W·θ of your own series' });

export const dynamicSrtResponse = z
  .object({
    srt_d: z.array(z.number()).meta({ description: 'mass-weighted mean sludge age θ at each point [d]' }),
    ...qualityFields,
  })
  .strict()
  .meta({ id: 'DynamicSrtResponse' });

export type StormRequest = z.infer<typeof stormRequest>;
export type StormResponse = z.infer<typeof stormResponse>;
export type StatePointRequest = z.infer<typeof statePointRequest>;
export type StatePointResponse = z.infer<typeof statePointResponse>;
export type SettlerRequest = z.infer<typeof settlerRequest>;
export type SettlerResponse = z.infer<typeof settlerResponse>;
export type SrtRequest = z.infer<typeof srtRequest>;
export type SrtResponse = z.infer<typeof srtResponse>;
export type SviRequest = z.infer<typeof sviRequest>;
export type SviResponse = z.infer<typeof sviResponse>;
export type StormTimelineRequest = z.infer<typeof stormTimelineRequest>;
export type StormTimelineResponse = z.infer<typeof stormTimelineResponse>;
export type DynamicSrtRequest = z.infer<typeof dynamicSrtRequest>;
export type DynamicSrtResponse = z.infer<typeof dynamicSrtResponse>;
