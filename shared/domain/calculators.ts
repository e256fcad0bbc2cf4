/**
 * The stateless calculators behind `POST /api/v1/calc/*`: each maps a request already parsed
 * by its zod schema (shared/contracts/calc.ts) to a response object. Figures that cannot be
 * computed are null; `quality`/`reasons` summarise the worst figure. The live balance engine
 * calls the same domain functions, so the calculators and the monitor cannot disagree.
 */
import type {
  StormTimelineRequest,
  StormTimelineResponse,
  DynamicSrtRequest,
  DynamicSrtResponse,
  SettlerRequest,
  SettlerResponse,
  SrtRequest,
  SrtResponse,
  StatePointRequest,
  StatePointResponse,
  StormRequest,
  StormResponse,
  SviRequest,
  SviResponse,
} from '../contracts/calc.js';
import { requiredRasConcSimple_gL } from './clarifier-balance.js';
import { rasConcMaxRuleOfThumb_gL } from './flux.js';
import { combineQuality, propagate, good, type Figure, type QualityInfo } from './quality.js';
import { minRecycleRatio } from './ras-margin.js';
import { blanketHeight_m, BSM1_SETTLER, BSM1_TAKACS, solveSettlerSteadyState, type SettlerBudget, type SettlerConfig } from './settler.js';
import { settleabilityIndex } from './settleability.js';
import { vesilindFromIndex } from './settling.js';
import { OPERATOR_CAUTION } from '../contracts/balance.js';
import { dynamicSrt, srt, wasFlowForTargetSrt_m3h } from './srt.js';
import { statePoint } from './state-point.js';
import { stormProjection } from './storm.js';
import { stormTimeline } from './storm-timeline.js';

/** Quality and reasons of a response (the worst over its figures), with the advisory caution every answer carries. */
function summary(...figs: QualityInfo[]): { caution: string; quality: 'good' | 'estimated' | 'unavailable'; reasons: string[] } {
  const c = combineQuality(...figs);
  return { caution: OPERATOR_CAUTION, quality: c.quality, reasons: c.reasons };
}

/**
 * Storm calculator (design §3 items 1–4): required X_R now and at the storm flow, rule-of-thumb
 * X_R,max = factor/SVI (common practice of the trade), R_min and Q_R,min at the storm flow, and
 * the storm projection with its rule-of-thumb checks (see storm.ts for the method).
 */
export function calcStorm(req: StormRequest): StormResponse {
  const xrNow = requiredRasConcSimple_gL(req.influentFlow_m3h, req.rasFlow_m3h, req.mlss_gL);
  const xrStorm = requiredRasConcSimple_gL(req.stormFlow_m3h, req.rasFlow_m3h, req.mlss_gL);
  const xrMax = rasConcMaxRuleOfThumb_gL(req.svi_mLg, req.xrFactor ?? 1200);
  const rmin: Figure<number> = xrMax.value === null ? xrMax : minRecycleRatio(req.mlss_gL, xrMax.value);
  const qrMin: Figure<number> = rmin.value === null ? rmin : propagate(good(req.stormFlow_m3h * rmin.value), rmin);
  const proj = stormProjection(req);
  const p = proj.value;
  return {
    rasConcRequired_gL: xrNow.value,
    stormRasConcRequired_gL: xrStorm.value,
    rasConcMax_gL: xrMax.value,
    minRecycleRatio: rmin.value,
    minRasFlow_m3h: qrMin.value,
    equilibriumMlss_gL: p?.equilibriumMlss_gL ?? null,
    sludgeToClarifiers_kg: p?.sludgeToClarifiers_kg ?? null,
    blanketVolume_m3: p?.blanketVolume_m3 ?? null,
    blanketRise_m: p?.blanketRise_m ?? null,
    storedFraction: p?.storedFraction ?? null,
    checks: p?.checks ?? [],
    ...summary(xrNow, xrStorm, xrMax, rmin, qrMin, proj),
  };
}

/**
 * State point calculator (Keinath 1985; Keinath et al. 1977): Vesilind parameters as given or
 * from the named SVI/SSVI correlation (settling.ts), then {@link statePoint}.
 */
export function calcStatePoint(req: StatePointRequest): StatePointResponse {
  const s = req.settling;
  const ves: Figure<{ v0_mh: number; k_Lg: number; source: string }> =
    'v0_mh' in s ? good({ v0_mh: s.v0_mh, k_Lg: s.k_Lg, source: 'given' }) : vesilindFromIndex(s.svi_mLg, s.correlation);
  const source = 'v0_mh' in s ? 'given' : s.correlation;
  if (ves.value === null) {
    return {
      overflowRate_mh: null, solidsLoading_kgm2h: null, underflowRate_mh: null, limitingFlux_kgm2h: null, limitingConc_gL: null,
      maxUnderflowConc_gL: null, requiredUnderflowConc_gL: null, thickeningMargin: null, clarificationMargin: null,
      settling: { v0_mh: null, k_Lg: null, source },
      ...summary(ves),
    };
  }
  const sp = statePoint({
    influentFlow_m3h: req.influentFlow_m3h,
    rasFlow_m3h: req.rasFlow_m3h,
    wasFlow_m3h: req.wasFlow_m3h,
    mlss_gL: req.mlss_gL,
    clarifierArea_m2: req.clarifierArea_m2,
    vesilind: ves.value,
    settlingQuality: ves,
  });
  return {
    overflowRate_mh: sp.overflowRate_mh.value,
    solidsLoading_kgm2h: sp.solidsLoading_kgm2h.value,
    underflowRate_mh: sp.underflowRate_mh.value,
    limitingFlux_kgm2h: sp.limitingFlux_kgm2h.value,
    limitingConc_gL: sp.limitingConc_gL.value,
    maxUnderflowConc_gL: sp.maxUnderflowConc_gL.value,
    requiredUnderflowConc_gL: sp.requiredUnderflowConc_gL.value,
    thickeningMargin: sp.thickeningMargin.value,
    clarificationMargin: sp.clarificationMargin.value,
    settling: { v0_mh: ves.value.v0_mh, k_Lg: ves.value.k_Lg, source },
    ...summary(ves, sp.overflowRate_mh, sp.solidsLoading_kgm2h, sp.limitingFlux_kgm2h, sp.requiredUnderflowConc_gL, sp.thickeningMargin, sp.clarificationMargin),
  };
}

/**
 * Layered settler calculator (Takács et al. 1991; BSM1 defaults, Alex et al. 2008): steady
 * state of the given settler, with the blanket height at the clarification threshold Xt.
 * `budget` bounds the work (the API passes its iteration and time budget): a solve that stops
 * before steady state answers the last iterate as `estimated` with the reason, never as good.
 */
export function calcSettler(req: SettlerRequest, budget?: SettlerBudget): SettlerResponse {
  const cfg: SettlerConfig = {
    area_m2: req.area_m2,
    depth_m: req.depth_m,
    layers: req.layers ?? BSM1_SETTLER.layers,
    feedLayer: req.feedLayer ?? BSM1_SETTLER.feedLayer,
    takacs: req.takacs ?? BSM1_TAKACS,
  };
  const r = solveSettlerSteadyState(cfg, { feedFlow_m3h: req.feedFlow_m3h, feedTss_gL: req.feedTss_gL, underflowFlow_m3h: req.underflowFlow_m3h }, budget);
  const why = r.stop === 'deadline' ? `the time budget ran out after ${r.iterations} steps` : `the budget of ${r.iterations} steps ran out`;
  const q: Figure<null> = r.converged ? good(null) : { value: null, quality: 'estimated', reasons: [`steady state not reached (${why}): the profile is the last iterate`] };
  return {
    layers_gL: r.layers_gL,
    effluentTss_gL: r.effluentTss_gL,
    underflowTss_gL: r.underflowTss_gL,
    blanketHeight_m: blanketHeight_m(cfg, r.layers_gL, cfg.takacs.xt_gL),
    ...summary(q),
  };
}

/** SRT calculator (design §3 item 5; see srt.ts): total and aeration-only SRT, and the WAS advisor for the total inventory. */
export function calcSrt(req: SrtRequest): SrtResponse {
  const s = srt(req);
  const figs: QualityInfo[] = [s.total_d, s.aeration_d];
  const out: SrtResponse = { srtTotal_d: s.total_d.value, srtAeration_d: s.aeration_d.value, caution: OPERATOR_CAUTION, quality: 'good', reasons: [] };
  if (req.targetSrt_d !== undefined) {
    const w = wasFlowForTargetSrt_m3h(req.aerationMass_kg + req.clarifierMass_kg, req.targetSrt_d, req.effluentFlow_m3h, req.effluentTss_gL, req.wasTss_gL);
    out.wasFlowForTarget_m3h = w.value;
    figs.push(w);
  }
  return { ...out, ...summary(...figs) };
}

/**
 * Settleability calculator (Standard Methods 2710 D; Jenkins et al. 1993; White 1975). Throws
 * DomainValidationError for a test that must be repeated (the zod schema reports the same
 * rule first, under the field path 'settledVolume_mLL').
 */
export function calcSvi(req: SviRequest): SviResponse {
  const r = settleabilityIndex(req);
  if (r.value === null) return { svi_mLg: null, kind: req.kind ?? 'SVI', ...summary(r) };
  return { svi_mLg: r.value.svi_mLg, kind: r.value.kind, ...summary(r) };
}


/**
 * Dynamic SRT calculator: the age balance d(M·θ)/dt = M − W·θ (see {@link dynamicSrt}; after
 * Takács et al. 2008 [M]) over the analyst's own series, inputs linear between points, from the
 * given initial age. One age per point, in days.
 */
export function calcDynamicSrt(req: DynamicSrtRequest): DynamicSrtResponse {
  const r = dynamicSrt(
    req.points.map((p) => ({ ts_ms: p.t_h * 3_600_000, mass_kg: p.inventory_kg, removal_kgh: p.wasted_kgh })),
    req.initialSrt_d,
  );
  return { srt_d: r.value?.map((p) => p.srt_d) ?? [], ...summary(r) };
}

/**
 * Storm timeline calculator (see storm-timeline.ts): the basin/clarifier exchange over the
 * hydrograph, X_R,max by the rule factor/SVI [CP], with the equilibrium MLSS at stormFlow_m3h
 * (stormProjection) beside it for comparison.
 */
export function calcStormTimeline(req: StormTimelineRequest): StormTimelineResponse {
  const r = stormTimeline(req);
  const eq = stormProjection(req);
  const v = r.value;
  return {
    points: v?.points ?? [],
    peakBlanket_m: v?.peakBlanket_m ?? null,
    blanketReachesSurface_h: v?.blanketReachesSurface_h ?? null,
    firstFailure_h: v?.firstFailure_h ?? null,
    rasConcMax_gL: v?.rasConcMax_gL ?? null,
    equilibriumMlss_gL: eq.value?.equilibriumMlss_gL ?? null,
    checks: v?.checks ?? [],
    ...summary(r, eq),
  };
}
