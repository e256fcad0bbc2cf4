import { z } from 'zod';

/**
 * One live solids balance of a plant, as the balance engine stores it (`balances.data` and
 * `balances.inputs`) and publishes it. Every number is a figure with its unit, quality and the
 * reasons for any downgrade (shared/domain/quality.ts): a missing, stale or bad input makes a
 * figure `estimated` or `unavailable` (value null), never a silent zero.
 */
export const figureQuality = z.enum(['good', 'estimated', 'unavailable']);
export const figureOut = z.object({
  value: z.number().nullable(),
  quality: figureQuality,
  reasons: z.array(z.string()),
  unit: z.string(),
});
export type FigureOut = z.infer<typeof figureOut>;

export const stormCheckOut = z.object({ rule: z.enum(['min-mlss', 'max-stored-fraction', 'max-blanket-rise']), ok: z.boolean(), value: z.number(), limit: z.number() });

/** Vesilind parameters the live figures used and where they came from. */
export const settlingUsedOut = z.object({
  v0_mh: z.number().nullable(),
  k_Lg: z.number().nullable(),
  /**
   * 'fit': fitted to the plant's own lab tests; 'operating-fit': fitted to its stable-blanket
   * hours at the limiting flux (Keinath et al. 1977); 'correlation': from the latest SVI by `correlation`.
   */
  source: z.enum(['fit', 'operating-fit', 'correlation']),
  correlation: z.string(),
  /** The used fit's number of points, their date range and standard errors (null for the correlation; absent in balances stored before they were added). */
  n: z.number().int().nullable().optional(),
  from: z.iso.datetime().nullable().optional(),
  to: z.iso.datetime().nullable().optional(),
  kStdErr_Lg: z.number().nullable().optional(),
  lnV0StdErr: z.number().nullable().optional(),
  quality: figureQuality,
  reasons: z.array(z.string()),
});

/**
 * Live state point of one clarifier entry (Keinath 1985; solids-flux theory, Keinath et al.
 * 1977), the same figures as `POST /calc/state-point` on the same inputs: enough for a state
 * point diagram (settling curve from v0 and k, overflow line of slope SOR, underflow line from
 * the state point (MLSS, SLR) to the required underflow concentration).
 */
export const statePointOut = z.object({
  /** The flows and MLSS this clarifier entry was computed with (the train's, split by area when it has several entries). */
  feed: z.object({ influentFlow_m3h: figureOut, rasFlow_m3h: figureOut, wasFlow_m3h: figureOut, mlss_gL: figureOut }),
  overflowRate_mh: figureOut,
  solidsLoading_kgm2h: figureOut,
  underflowRate_mh: figureOut,
  limitingFlux_kgm2h: figureOut,
  limitingConc_gL: figureOut,
  maxUnderflowConc_gL: figureOut,
  requiredUnderflowConc_gL: figureOut,
  thickeningMargin: figureOut,
  clarificationMargin: figureOut,
  thickeningLimitFlow_m3h: figureOut,
  clarificationLimitFlow_m3h: figureOut,
  settling: settlingUsedOut,
  /** X_R,max both ways: the rule factor/SVI [CP] and flux theory G_L/u; `used` is the lower, with the reason. */
  rasConcMax: z.object({ rule_gL: figureOut, flux_gL: figureOut, used: z.enum(['rule', 'flux']).nullable(), reason: z.string() }),
});

/** The design storm in time for one train (shared/domain/storm-timeline.ts; setting storm.hydrograph). */
export const stormTimelineOut = z.object({
  points: z.array(z.object({ t_h: z.number(), mlss_gL: z.number(), clarifierMass_kg: z.number(), blanket_m: z.number(), rasConcRequired_gL: z.number().nullable() })),
  peakBlanket_m: figureOut,
  /** First time the blanket reaches the clarifier surface [h from the storm's start]; null if never (or not computed). */
  blanketReachesSurface_h: z.number().nullable(),
  /** First time any storm check fails [h from the storm's start]; null if none does (or not computed). */
  firstFailure_h: z.number().nullable(),
  firstFailedRule: z.enum(['min-mlss', 'max-stored-fraction', 'max-blanket-rise', 'blanket-below-surface']).nullable(),
  checks: z.array(z.object({ rule: z.enum(['min-mlss', 'max-stored-fraction', 'max-blanket-rise', 'blanket-below-surface']), ok: z.boolean(), value: z.number(), limit: z.number(), firstFailed_h: z.number().nullable() })),
  quality: figureQuality,
  reasons: z.array(z.string()),
});

/** One Vesilind fit to the plant's own data with its standard errors, number of points and their date range. */
export const settlingFitOut = z.object({
  v0_mh: z.number().nullable(),
  k_Lg: z.number().nullable(),
  /** Standard errors (least squares): k ± 2·se, v0·e^(±2·se) at about 95 %. */
  kStdErr_Lg: z.number().nullable(),
  lnV0StdErr: z.number().nullable(),
  r2: z.number().nullable(),
  /** Number of points fitted (lab tests, or stable-blanket hours), and their date range. */
  n: z.number().int(),
  from: z.iso.datetime().nullable(),
  to: z.iso.datetime().nullable(),
  minPoints: z.number().int(),
  quality: figureQuality,
  reasons: z.array(z.string()),
});

/**
 * Settling parameters of the plant: the one used, the fit to its own lab tests, the fit to its
 * stable-blanket hours (`operatingFit`: points are hours; absent in balances stored before it
 * existed) and the correlation beside them.
 */
export const settlingOut = z.object({
  used: settlingUsedOut,
  fit: settlingFitOut,
  operatingFit: settlingFitOut.optional(),
  correlation: z.object({ correlation: z.string(), v0_mh: z.number().nullable(), k_Lg: z.number().nullable(), quality: figureQuality, reasons: z.array(z.string()) }),
});

export const balanceBasinOut = z.object({
  code: z.string(),
  train: z.string(),
  volume_m3: z.number(),
  /** Aerated fraction of the volume 0 … 1 from the plant model (1 when the model does not say). */
  aeratedFraction: z.number(),
  mlss_gL: figureOut,
  mass_kg: figureOut,
});
export const balanceClarifierOut = z.object({
  code: z.string(),
  train: z.string(),
  area_m2: z.number(),
  sideWaterDepth_m: z.number(),
  blanketLevel_m: figureOut,
  /** Slope of the blanket level over the rate window (least squares) [m/h]. */
  blanketRate_m_h: figureOut,
  underflowTss_gL: figureOut,
  effluentTss_gL: figureOut,
  blanketConc_gL: figureOut,
  blanketMass_kg: figureOut,
  /** Mass from integrating the clarifier balance over the integral window, from the blanket mass at its start. */
  integratedMass_kg: figureOut,
  integralDiscrepancy_kg: figureOut,
  statePoint: statePointOut,
});
export const balanceTrainOut = z.object({
  code: z.string(),
  influentFlow_m3h: figureOut,
  rasFlow_m3h: figureOut,
  wasFlow_m3h: figureOut,
  mlss_gL: figureOut,
  rasPumpCapacity_m3h: z.number(),
  /** Which X_R,max the RAS margins use: the lower of the rule [CP] and flux theory (null: neither available). */
  rasConcMaxBasis: z.enum(['rule', 'flux']).nullable(),
  ras: z.object({
    /** X_R,max the margins use: the lower of the rule and flux theory over the train's clarifiers (reason in its reasons). */
    rasConcMax_gL: figureOut,
    rasConcMaxRule_gL: figureOut,
    rasConcMaxFlux_gL: figureOut,
    requiredRasConc_gL: figureOut,
    concentrationMargin: figureOut,
    minRecycleRatio: figureOut,
    minRasFlow_m3h: figureOut,
    pumpMargin: figureOut,
    concentrationLimitFlow_m3h: figureOut,
    pumpLimitFlow_m3h: figureOut,
  }),
  storm: z.object({
    stormFlow_m3h: figureOut,
    equilibriumMlss_gL: figureOut,
    sludgeToClarifiers_kg: figureOut,
    blanketRise_m: figureOut,
    storedFraction: figureOut,
    checks: z.array(stormCheckOut),
    timeline: stormTimelineOut,
  }),
});

export const balanceDataOut = z.object({
  inventory: z.object({ aerationMass_kg: figureOut, clarifierMass_kg: figureOut, totalMass_kg: figureOut, storedFraction: figureOut }),
  basins: z.array(balanceBasinOut),
  clarifiers: z.array(balanceClarifierOut),
  trains: z.array(balanceTrainOut),
  settleability: z.object({ svi_mLg: figureOut, kind: z.enum(['SVI', 'DSVI']).nullable(), sampledAt: z.iso.datetime().nullable() }),
  settling: settlingOut,
  storm: z.object({ peakFlow_m3h: figureOut, source: z.enum(['plant', 'setting', 'none']) }),
  srt: z.object({
    total_d: figureOut,
    /** Basin (aeration-tank) SRT: all basin mass, aerated or not, over the solids removal. */
    aeration_d: figureOut,
    /** Aerobic SRT: the aerated basin mass Σ(Vᵢ·Xᵢ·fᵢ) over the solids removal (mass basis). */
    aerobic_d: figureOut,
    /** Present aerobic share of the basin mass Σ(Vᵢ·Xᵢ·fᵢ)/Σ(Vᵢ·Xᵢ) [-]. */
    aerobicFraction: figureOut,
    coverage: z.number(),
    dynamic_d: figureOut,
    target_d: z.number(),
    wasAdvice_m3h: figureOut,
    wasFlow_m3h: figureOut,
  }),
  /** Operator caution carried with every balance (the figures are advisory). */
  caution: z.string(),
});
export type BalanceData = z.infer<typeof balanceDataOut>;

export const balanceInputOut = z.object({
  tagId: z.number().int(),
  tag: z.string(),
  signal: z.string(),
  target: z.string(),
  value: z.number().nullable(),
  unit: z.string(),
  quality: figureQuality,
  reasons: z.array(z.string()),
  /** Null: nothing received for this tag yet. */
  ts: z.iso.datetime().nullable(),
  receivedAt: z.iso.datetime().nullable(),
  /** Wall-clock seconds since ingest received the value. */
  age_s: z.number().nullable(),
  /** Sample-time seconds the value lags behind the newest sample of the plant. */
  lag_s: z.number().nullable(),
  expectedPeriod_s: z.number(),
  stale: z.boolean(),
  /** The source or ingest graded the value bad (or its unit does not fit the signal). */
  bad: z.boolean(),
});
export const balanceInputsOut = z.object({
  signals: z.array(balanceInputOut),
  plantClock: z.iso.datetime().nullable(),
  lastReceivedAt: z.iso.datetime().nullable(),
  /** Wall-clock seconds since any tag of the plant was received (null: never). */
  ingestAge_s: z.number().nullable(),
  svi: z.object({ kind: z.enum(['SVI', 'DSVI']), value_mLg: z.number(), sampledAt: z.iso.datetime() }).nullable(),
});
export type BalanceInputs = z.infer<typeof balanceInputsOut>;

export const balanceOut = z.object({
  id: z.number().int().optional(),
  plantId: z.number().int(),
  ts: z.iso.datetime(),
  quality: figureQuality,
  data: balanceDataOut,
  inputs: balanceInputsOut,
});
export type Balance = z.infer<typeof balanceOut>;

/** The caution every advisory output carries (design: the licensed operator decides). */
export const OPERATOR_CAUTION =
  'Advisory figures computed from live signals and rules of thumb; the licensed operator decides on any operating change.';
