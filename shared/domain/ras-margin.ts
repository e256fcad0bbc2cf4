/**
 * Return-sludge (RAS) capacity margin: can the clarifier underflow and the RAS pumps hold the
 * solids at the present influent flow? Built on the steady-state clarifier balance (design §3
 * items 1–3) and a maximum return concentration X_R,max from the rule of thumb or from
 * solids-flux theory (flux.ts).
 */
import { flowAtZeroMargin } from './numeric.js';
import { good, propagate, unavailable, type Figure, type QualityInfo } from './quality.js';

export interface RasMarginInputs {
  influentFlow_m3h: number;
  rasFlow_m3h: number;
  mlss_gL: number;
  /** Maximum achievable return concentration [g/L] (rule of thumb or flux theory). */
  rasConcMax_gL: number;
  /** Installed RAS pump capacity [m³/h]; pump-side figures are unavailable without it. */
  rasPumpCapacity_m3h?: number;
  /** Quality of X_R,max (e.g. from an estimated SVI); good when omitted. */
  rasConcMaxQuality?: QualityInfo;
}

export interface RasMargin {
  /** X·(Q + Q_R)/Q_R [g/L]. */
  requiredRasConc_gL: Figure<number>;
  /** 1 − X_R,required/X_R,max [-]. */
  concentrationMargin: Figure<number>;
  /** R_min = X/(X_R,max − X) [-]. */
  minRecycleRatio: Figure<number>;
  /** Q_R,min = Q·R_min [m³/h]. */
  minRasFlow_m3h: Figure<number>;
  /** 1 − Q_R,min/capacity [-]. */
  pumpMargin: Figure<number>;
  /** Influent flow at which the concentration margin reaches zero, Q_R held [m³/h]. */
  concentrationLimitFlow_m3h: Figure<number>;
  /** Influent flow at which Q_R,min reaches the installed pump capacity [m³/h]. */
  pumpLimitFlow_m3h: Figure<number>;
}

/**
 * Minimum return ratio R_min = X/(X_R,max − X) from the clarifier balance with Q_W = X_e = 0
 * (design §3 item 3): the smallest Q_R/Q for which the required X_R stays within X_R,max.
 * Unavailable when X_R,max ≤ X (no return rate can hold the solids).
 */
export function minRecycleRatio(mlss_gL: number, rasConcMax_gL: number): Figure<number> {
  if (![mlss_gL, rasConcMax_gL].every((v) => Number.isFinite(v) && v >= 0)) return unavailable('MLSS and X_R,max must be finite and ≥ 0');
  if (rasConcMax_gL <= mlss_gL) return unavailable(`X_R,max = ${rasConcMax_gL.toPrecision(4)} g/L does not exceed MLSS = ${mlss_gL.toPrecision(4)} g/L: no return rate can hold the solids`);
  return good(mlss_gL / (rasConcMax_gL - mlss_gL));
}

/**
 * RAS capacity margin (design §3 item 3): concentration side 1 − X_R,req/X_R,max with
 * X_R,req = X·(Q + Q_R)/Q_R; R_min = X/(X_R,max − X); Q_R,min = Q·R_min; pump side
 * 1 − Q_R,min/capacity; and for each side the influent flow at which the margin reaches zero
 * (bisection, Q_R held). Figures inherit the quality of X_R,max.
 */
export function rasMargin(inp: RasMarginInputs): RasMargin {
  const { influentFlow_m3h: q, rasFlow_m3h: qr, mlss_gL: x, rasConcMax_gL: xrMax } = inp;
  const xq: QualityInfo = inp.rasConcMaxQuality ?? { quality: 'good', reasons: [] };
  const w = (f: Figure<number>): Figure<number> => propagate(f, xq);
  if (![q, qr, x, xrMax].every((v) => Number.isFinite(v) && v >= 0)) {
    const u = unavailable<number>('flows and concentrations must be finite and ≥ 0');
    return { requiredRasConc_gL: u, concentrationMargin: u, minRecycleRatio: u, minRasFlow_m3h: u, pumpMargin: u, concentrationLimitFlow_m3h: u, pumpLimitFlow_m3h: u };
  }
  const reqAt = (qq: number): number | null => (qr > 0 ? (x * (qq + qr)) / qr : null);
  const concMarginAt = (qq: number): number | null => {
    const r = reqAt(qq);
    return r === null || !(xrMax > 0) ? null : 1 - r / xrMax;
  };
  const req = reqAt(q);
  const requiredRasConc_gL = req === null ? unavailable<number>('no return flow: required X_R undefined') : good(req);
  const cm = concMarginAt(q);
  const concentrationMargin = w(cm === null ? unavailable(...(req === null ? requiredRasConc_gL.reasons : ['X_R,max is zero'])) : good(cm));
  const rmin = w(minRecycleRatio(x, xrMax));
  const minRasFlow_m3h = rmin.value === null ? rmin : propagate(good(q * rmin.value), rmin);
  const cap = inp.rasPumpCapacity_m3h;
  let pumpMargin: Figure<number>;
  let pumpLimitFlow_m3h: Figure<number>;
  if (cap === undefined || !Number.isFinite(cap) || cap <= 0) {
    pumpMargin = unavailable('installed RAS pump capacity not given');
    pumpLimitFlow_m3h = pumpMargin;
  } else if (rmin.value === null) {
    pumpMargin = rmin;
    pumpLimitFlow_m3h = rmin;
  } else {
    const rm = rmin.value;
    pumpMargin = propagate(good(1 - (q * rm) / cap), rmin);
    const z = flowAtZeroMargin((qq) => 1 - (qq * rm) / cap, Math.max(q, 1));
    pumpLimitFlow_m3h = propagate(z.flow_m3h === null ? unavailable(z.reason) : good(z.flow_m3h), rmin);
  }
  let concentrationLimitFlow_m3h: Figure<number>;
  if (cm === null) concentrationLimitFlow_m3h = concentrationMargin;
  else {
    const z = flowAtZeroMargin(concMarginAt, Math.max(q, 1));
    concentrationLimitFlow_m3h = w(z.flow_m3h === null ? unavailable(z.reason) : good(z.flow_m3h));
  }
  return { requiredRasConc_gL, concentrationMargin, minRecycleRatio: rmin, minRasFlow_m3h, pumpMargin, concentrationLimitFlow_m3h, pumpLimitFlow_m3h };
}
