/**
 * The live state point of every clarifier (Keinath 1985; solids-flux theory of Keinath et al.
 * 1977) with the same shared/domain functions the what-if calculator runs (statePoint,
 * vesilindFromIndex), and the maximum return concentration both ways — the rule of thumb
 * factor/SVI [CP] and flux theory G_L/u — of which the RAS margin takes the lower.
 */
import type { BalanceData } from '../../contracts/balance.js';
import { rasConcMaxFlux_gL } from '../flux.js';
import { combineQuality, fromFigures, propagate, unavailable, withUnit, type Figure } from '../quality.js';
import { vesilindFromIndex, type SettlingCorrelationId, type VesilindParams } from '../settling.js';
import type { PlantSettlingFit } from '../settling-fit.js';
import { statePoint } from '../state-point.js';

export type StatePointOut = BalanceData['clarifiers'][number]['statePoint'];

/** Vesilind parameters the balance uses and where they came from. */
export interface SettlingUsed {
  params: Figure<VesilindParams>;
  /** 'fit': fitted to the plant's own lab data; 'correlation': from the latest SVI by the named correlation. */
  source: 'fit' | 'correlation';
  correlation: SettlingCorrelationId;
}

/**
 * Settling parameters from the latest SVI/DSVI by the correlation of the setting
 * settling.correlation (vesilindFromIndex, published correlations listed in settling.ts),
 * carrying the SVI's quality.
 */
export function settlingFromCorrelation(svi: Figure<number>, correlation: SettlingCorrelationId): SettlingUsed {
  const params: Figure<VesilindParams> =
    svi.value === null
      ? unavailable(...svi.reasons)
      : (() => {
          const v = vesilindFromIndex(svi.value, correlation);
          return propagate(v.value === null ? unavailable<VesilindParams>(...v.reasons) : { ...v, value: { v0_mh: v.value.v0_mh, k_Lg: v.value.k_Lg } }, svi);
        })();
  return { params, source: 'correlation', correlation };
}

export type SettlingOut = BalanceData['settling'];

/**
 * Which settling parameters the live state point uses: the fit to the plant's own tests
 * (plantSettlingFit) when it has at least `minPoints` tests and a fit, otherwise the correlation
 * of the latest SVI (settlingFromCorrelation) — saying which and why — and both shown side by side.
 */
export function chooseSettling(svi: Figure<number>, correlation: SettlingCorrelationId, fit: PlantSettlingFit, minPoints: number): { used: SettlingUsed; out: SettlingOut } {
  const corr = settlingFromCorrelation(svi, correlation);
  const useFit = fit.n >= minPoints && fit.fit.value !== null;
  const why = useFit
    ? `Vesilind fit to the plant's own ${fit.n} settleability tests (≥ ${minPoints}, setting settling.fit_min_points)`
    : `correlation ${correlation} of the latest SVI: the fit has ${fit.n} test(s)${fit.fit.value === null && fit.n > 0 ? ` and no result (${fit.fit.reasons.join('; ')})` : ''}, fewer than ${minPoints} or none usable (setting settling.fit_min_points)`;
  const used: SettlingUsed = useFit
    ? { params: { value: { v0_mh: fit.fit.value!.v0_mh, k_Lg: fit.fit.value!.k_Lg }, quality: fit.fit.quality, reasons: [...fit.fit.reasons, why] }, source: 'fit', correlation }
    : { ...corr, params: { ...corr.params, reasons: [...corr.params.reasons, why] } };
  const iso = (ms: number | null) => (ms === null ? null : new Date(ms).toISOString());
  const f = fit.fit.value;
  return {
    used,
    out: {
      used: { v0_mh: used.params.value?.v0_mh ?? null, k_Lg: used.params.value?.k_Lg ?? null, source: used.source, correlation, quality: used.params.quality, reasons: [...used.params.reasons] },
      fit: { v0_mh: f?.v0_mh ?? null, k_Lg: f?.k_Lg ?? null, kStdErr_Lg: f?.kStdErr_Lg ?? null, lnV0StdErr: f?.lnV0StdErr ?? null, r2: f?.r2 ?? null, n: fit.n, from: iso(fit.from_ms), to: iso(fit.to_ms), minPoints, quality: fit.fit.quality, reasons: [...fit.fit.reasons] },
      correlation: { correlation, v0_mh: corr.params.value?.v0_mh ?? null, k_Lg: corr.params.value?.k_Lg ?? null, quality: corr.params.quality, reasons: [...corr.params.reasons] },
    },
  };
}

export interface ClarifierStatePointInputs {
  /** The clarifier entry's share of the train's flows [-] (its share of the train's clarifier area). */
  share: number;
  /** Number of clarifier entries in the train (a split other than one is by area, estimated). */
  entries: number;
  code: string;
  area_m2: number;
  influentFlow_m3h: Figure<number>;
  rasFlow_m3h: Figure<number>;
  wasFlow_m3h: Figure<number>;
  mlss_gL: Figure<number>;
  settling: SettlingUsed;
  /** X_R,max by the rule of thumb factor/SVI [g/L]. */
  rasConcMaxRule_gL: Figure<number>;
}

const split = (f: Figure<number>, inp: ClarifierStatePointInputs, what: string): Figure<number> => {
  if (inp.entries <= 1) return f;
  return fromFigures([f], (v) => ({ value: v * inp.share, quality: 'estimated', reasons: [`${inp.code}: ${what} split between the train's ${inp.entries} clarifier entries by area (not measured)`] }));
};

/**
 * State point of one clarifier entry (statePoint: overflow rate, solids loading, underflow rate,
 * limiting flux and concentration, required underflow concentration, thickening and
 * clarification margins and the flows at which they run out) at the train's MLSS and its share
 * of the train's flows, with the settling parameters given; X_R,max both by the rule [CP] and by
 * flux theory G_L/u (Keinath et al. 1977), and which of them is lower. Every figure carries the
 * quality of its inputs.
 */
export function clarifierStatePoint(inp: ClarifierStatePointInputs): StatePointOut {
  const q = split(inp.influentFlow_m3h, inp, 'influent flow');
  const qr = split(inp.rasFlow_m3h, inp, 'return flow');
  const qw = split(inp.wasFlow_m3h, inp, 'waste flow');
  const x = inp.mlss_gL;
  const ves = inp.settling.params;
  const ins = [q, qr, qw, x];
  const settling = {
    v0_mh: ves.value?.v0_mh ?? null,
    k_Lg: ves.value?.k_Lg ?? null,
    source: inp.settling.source,
    correlation: inp.settling.correlation,
    quality: ves.quality,
    reasons: [...ves.reasons],
  };
  const feed = { influentFlow_m3h: withUnit(q, 'm3/h'), rasFlow_m3h: withUnit(qr, 'm3/h'), wasFlow_m3h: withUnit(qw, 'm3/h'), mlss_gL: withUnit(x, 'g/L') };
  let sp: ReturnType<typeof statePoint> | null = null;
  if (ins.every((f) => f.value !== null) && ves.value !== null && q.value! >= qw.value!) {
    sp = statePoint({ influentFlow_m3h: q.value!, rasFlow_m3h: qr.value!, wasFlow_m3h: qw.value!, mlss_gL: x.value!, clarifierArea_m2: inp.area_m2, vesilind: ves.value, settlingQuality: ves });
  }
  const missing = combineQuality(...ins, ves);
  const whyNot = q.value !== null && qw.value !== null && q.value < qw.value ? [`${inp.code}: waste flow exceeds influent flow`] : missing.reasons;
  const out = (pick: (s: ReturnType<typeof statePoint>) => Figure<number>, unit: string) => withUnit(sp ? propagate(pick(sp), ...ins) : unavailable(...whyNot), unit);
  // X_R,max by flux theory at this clarifier's underflow rate u = (Q_R + Q_W)/A.
  const flux = sp && sp.underflowRate_mh.value !== null && ves.value ? propagate(rasConcMaxFlux_gL(sp.underflowRate_mh.value, ves.value), ves, qr, qw) : unavailable<number>(...whyNot);
  const lower = lowerRasConcMax(inp.rasConcMaxRule_gL, flux);
  return {
    feed,
    overflowRate_mh: out((s) => s.overflowRate_mh, 'm/h'),
    solidsLoading_kgm2h: out((s) => s.solidsLoading_kgm2h, 'kg/(m2·h)'),
    underflowRate_mh: out((s) => s.underflowRate_mh, 'm/h'),
    limitingFlux_kgm2h: out((s) => s.limitingFlux_kgm2h, 'kg/(m2·h)'),
    limitingConc_gL: out((s) => s.limitingConc_gL, 'g/L'),
    maxUnderflowConc_gL: out((s) => s.maxUnderflowConc_gL, 'g/L'),
    requiredUnderflowConc_gL: out((s) => s.requiredUnderflowConc_gL, 'g/L'),
    thickeningMargin: out((s) => s.thickeningMargin, '-'),
    clarificationMargin: out((s) => s.clarificationMargin, '-'),
    thickeningLimitFlow_m3h: out((s) => s.thickeningLimitFlow_m3h, 'm3/h'),
    clarificationLimitFlow_m3h: out((s) => s.clarificationLimitFlow_m3h, 'm3/h'),
    settling,
    rasConcMax: { rule_gL: withUnit(inp.rasConcMaxRule_gL, 'g/L'), flux_gL: withUnit(flux, 'g/L'), used: lower.used, reason: lower.reason },
  };
}

/**
 * The lower of the two maximum return concentrations and why: flux theory G_L/u describes the
 * clarifier at its present underflow rate with this sludge's settling, the rule factor/SVI [CP]
 * only the settled volume; taking the lower keeps the RAS margin on the safe side. Flux theory
 * has no limit when the underflow rate reaches v0·e⁻² (thickening does not limit) and none
 * without settling parameters: the rule is used then, said so.
 */
export function lowerRasConcMax(rule: Figure<number>, flux: Figure<number>): { value: Figure<number>; used: 'rule' | 'flux' | null; reason: string } {
  const r = rule.value;
  const f = flux.value;
  const fmt = (v: number) => v.toFixed(2);
  if (r === null && f === null) return { value: unavailable(...combineQuality(rule, flux).reasons), used: null, reason: 'neither the rule (no SVI) nor flux theory gives X_R,max' };
  if (f === null) {
    const reason = `X_R,max by the rule ${fmt(r!)} g/L (factor/SVI [CP]): flux theory gives none (${flux.reasons.join('; ')})`;
    return { value: { ...rule, reasons: [...rule.reasons, reason] }, used: 'rule', reason };
  }
  if (r === null || f < r) {
    const reason =
      r === null
        ? `X_R,max by flux theory ${fmt(f)} g/L (G_L/u): the rule has no SVI`
        : `X_R,max by flux theory ${fmt(f)} g/L (G_L/u) is below the rule's ${fmt(r)} g/L (factor/SVI [CP]): the lower one limits the RAS margin`;
    return { value: { ...flux, reasons: [...flux.reasons, reason] }, used: 'flux', reason };
  }
  const reason = `X_R,max by the rule ${fmt(r)} g/L (factor/SVI [CP]) is at or below flux theory's ${fmt(f)} g/L (G_L/u): the lower one limits the RAS margin`;
  return { value: { ...rule, reasons: [...rule.reasons, reason] }, used: 'rule', reason };
}

/** The train's X_R,max for the RAS margin: the lowest of its clarifiers' (each already the lower of rule and flux theory). */
export function trainRasConcMax(rule: Figure<number>, clarifiers: readonly StatePointOut[]): { value: Figure<number>; used: 'rule' | 'flux' | null; reason: string } {
  const fluxes = clarifiers.map((c) => c.rasConcMax.flux_gL).filter((f) => f.value !== null);
  if (fluxes.length === 0) {
    return lowerRasConcMax(rule, clarifiers.length ? { value: null, quality: 'unavailable', reasons: [...clarifiers[0]!.rasConcMax.flux_gL.reasons] } : unavailable('no clarifier'));
  }
  const min = fluxes.reduce((a, b) => (b.value! < a.value! ? b : a));
  return lowerRasConcMax(rule, { value: min.value, quality: min.quality, reasons: [...min.reasons] });
}
