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
  /**
   * 'fit': fitted to the plant's own lab tests; 'operating-fit': fitted to its stable-blanket
   * hours at the limiting flux; 'correlation': from the latest SVI by the named correlation.
   */
  source: 'fit' | 'operating-fit' | 'correlation';
  correlation: SettlingCorrelationId;
  /** The fit's points, their date range (ISO) and standard errors; null for the correlation. */
  basis: { n: number; from: string | null; to: string | null; kStdErr_Lg: number | null; lnV0StdErr: number | null } | null;
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
  return { params, source: 'correlation', correlation, basis: null };
}

export type SettlingOut = BalanceData['settling'];

/** One candidate fit of chooseSettling with the minimum number of points it needs (a setting). */
export interface SettlingCandidate {
  fit: PlantSettlingFit;
  minPoints: number;
}

const iso = (ms: number | null) => (ms === null ? null : new Date(ms).toISOString());

function fitOut(c: SettlingCandidate) {
  const f = c.fit.fit.value;
  return {
    v0_mh: f?.v0_mh ?? null,
    k_Lg: f?.k_Lg ?? null,
    kStdErr_Lg: f?.kStdErr_Lg ?? null,
    lnV0StdErr: f?.lnV0StdErr ?? null,
    r2: f?.r2 ?? null,
    n: c.fit.n,
    from: iso(c.fit.from_ms),
    to: iso(c.fit.to_ms),
    minPoints: c.minPoints,
    quality: c.fit.fit.quality,
    reasons: [...c.fit.fit.reasons],
  };
}

const enough = (c: SettlingCandidate) => c.fit.n >= c.minPoints && c.fit.fit.value !== null;
const shortOf = (c: SettlingCandidate, what: string, points: string, setting: string) =>
  `the ${what} has ${c.fit.n} ${points}${c.fit.fit.value === null && c.fit.n > 0 ? ` and no result (${c.fit.fit.reasons.join('; ')})` : ''}, fewer than ${c.minPoints} or none usable (setting ${setting})`;

/**
 * Which settling parameters the live state point uses, in this order, each only with at least
 * its minimum number of points (settings settling.fit_min_points, settling.operating_fit_min_points):
 *
 * 1. the fit to the plant's own settleability tests (plantSettlingFit): velocity against
 *    concentration of this sludge, the very quantities of Vesilind's law (Vesilind 1968), read
 *    in the lab (as a 30-min mean, a lower bound: the safe side);
 * 2. the fit to its stable-blanket hours (operatingSettlingFit): this sludge in the full-scale
 *    clarifier, but read through flux theory on the assumption that a stable deep blanket means
 *    critical loading (Keinath et al. 1977). The assumption cannot be checked from the data; where
 *    it fails (an underloaded clarifier whose blanket stands for other reasons) X_R lies below
 *    G_L/u and the fit reads the limiting flux low — safe, but less direct than the tests, hence second;
 * 3. the correlation of the latest SVI (settlingFromCorrelation): other plants' sludges related to
 *    this one by the SVI alone (e.g. Daigger & Roper 1985; Härtel & Pöpel 1992), the fallback.
 *
 * Says which and why, and returns all three side by side with their points, date ranges and
 * standard errors. Without an operating fit (a plant without the tags) it is left out.
 */
export function chooseSettling(svi: Figure<number>, correlation: SettlingCorrelationId, lab: SettlingCandidate, operating: SettlingCandidate | null): { used: SettlingUsed; out: SettlingOut } {
  const corr = settlingFromCorrelation(svi, correlation);
  const basis = (c: SettlingCandidate): SettlingUsed['basis'] => ({ n: c.fit.n, from: iso(c.fit.from_ms), to: iso(c.fit.to_ms), kStdErr_Lg: c.fit.fit.value?.kStdErr_Lg ?? null, lnV0StdErr: c.fit.fit.value?.lnV0StdErr ?? null });
  const fromFit = (c: SettlingCandidate, source: 'fit' | 'operating-fit', why: string): SettlingUsed => {
    const v = c.fit.fit.value!;
    return { params: { value: { v0_mh: v.v0_mh, k_Lg: v.k_Lg }, quality: c.fit.fit.quality, reasons: [...c.fit.fit.reasons, why] }, source, correlation, basis: basis(c) };
  };
  const labShort = shortOf(lab, 'lab fit', 'test(s)', 'settling.fit_min_points');
  let used: SettlingUsed;
  if (enough(lab)) {
    used = fromFit(lab, 'fit', `Vesilind fit to the plant's own ${lab.fit.n} settleability tests (≥ ${lab.minPoints}, setting settling.fit_min_points)`);
  } else if (operating && enough(operating)) {
    used = fromFit(operating, 'operating-fit', `Vesilind fit to the plant's own ${operating.fit.n} stable-blanket hours (≥ ${operating.minPoints}, setting settling.operating_fit_min_points): ${labShort}`);
  } else {
    const opShort = operating ? `; ${shortOf(operating, 'operating fit', 'stable-blanket hour(s)', 'settling.operating_fit_min_points')}` : '';
    const why = `correlation ${correlation} of the latest SVI: ${labShort}${opShort}`;
    used = { ...corr, params: { ...corr.params, reasons: [...corr.params.reasons, why] } };
  }
  return {
    used,
    out: {
      used: settlingUsedOut(used),
      fit: fitOut(lab),
      ...(operating ? { operatingFit: fitOut(operating) } : {}),
      correlation: { correlation, v0_mh: corr.params.value?.v0_mh ?? null, k_Lg: corr.params.value?.k_Lg ?? null, quality: corr.params.quality, reasons: [...corr.params.reasons] },
    },
  };
}

/** The contract's view of the parameters used (balance.settling.used and every state point's settling). */
export function settlingUsedOut(u: SettlingUsed): SettlingOut['used'] {
  return {
    v0_mh: u.params.value?.v0_mh ?? null,
    k_Lg: u.params.value?.k_Lg ?? null,
    source: u.source,
    correlation: u.correlation,
    n: u.basis?.n ?? null,
    from: u.basis?.from ?? null,
    to: u.basis?.to ?? null,
    kStdErr_Lg: u.basis?.kStdErr_Lg ?? null,
    lnV0StdErr: u.basis?.lnV0StdErr ?? null,
    quality: u.params.quality,
    reasons: [...u.params.reasons],
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
  const settling = settlingUsedOut(inp.settling);
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
