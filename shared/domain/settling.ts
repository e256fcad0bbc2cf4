/**
 * Vesilind zone-settling velocity vs = v0·exp(−k·X) (Vesilind 1968) and its parameters: from a
 * settling-test series by least squares, or from published SVI / SSVI correlations.
 * Units: v0 m/h, k L/g, X g/L, SVI / SSVI mL/g.
 */
import { estimated, good, unavailable, type Figure } from './quality.js';

export interface VesilindParams {
  v0_mh: number;
  k_Lg: number;
}

export const SETTLING_CORRELATIONS = ['haertel-poepel-1992', 'daigger-roper-1985', 'daigger-1995', 'wahlberg-keinath-1988'] as const;
export type SettlingCorrelationId = (typeof SETTLING_CORRELATIONS)[number];

/** Which settleability index a correlation expects. */
export const CORRELATION_INDEX: Record<SettlingCorrelationId, 'SVI' | 'SSVI'> = {
  'haertel-poepel-1992': 'SVI',
  'daigger-roper-1985': 'SVI',
  'daigger-1995': 'SVI',
  'wahlberg-keinath-1988': 'SSVI',
};

/**
 * Range of the stirred SSVI3.5 [mL/g] over which Flocstream uses the Wahlberg & Keinath (1988)
 * correlation without an extrapolation warning. Our choice, not the paper's stated data range
 * (not recalled): from the minimum of k (≈ 35.4 mL/g, below which k would fall as sludge worsens)
 * to 220 mL/g, where v0 = 1.77 m/h still lies clear of its zero at ≈ 248.8 mL/g.
 */
export const WAHLBERG_KEINATH_RANGE_mLg = Object.freeze({ min: 35, max: 220 });

/** Vesilind (1968) hindered settling velocity vs = v0·exp(−k·X) [m/h]. */
export function vesilindVelocity_mh(x_gL: number, p: VesilindParams): number {
  return p.v0_mh * Math.exp(-p.k_Lg * x_gL);
}

/**
 * Vesilind parameters from an SVI (or SSVI3.5) by a published correlation:
 * - 'haertel-poepel-1992' (Härtel 1990; Härtel & Pöpel 1992, as implemented in the Modelica
 *   WasteWater library, ASM1/SecClar/Haertel.mo): v0 = 17.4·e^(−0.0113·SVI) + 3.931,
 *   k = 1.043 − 0.9834·e^(−0.00581·SVI).
 * - 'daigger-roper-1985' (Daigger & Roper 1985, JWPCF 57:859): k = 0.148 + 0.00210·SVI;
 *   v0 = 7.80 m/h recalled from memory [M].
 * - 'daigger-1995' (Daigger 1995, WER 67:95): ln vs = 1.871 − (0.1646 + 0.001586·SVI)·X, i.e.
 *   v0 = e^1.871 m/h, k = 0.1646 + 0.001586·SVI — coefficients recalled from memory [M].
 * - 'wahlberg-keinath-1988' (Wahlberg & Keinath 1988, JWPCF 60:2095), input is the stirred
 *   SSVI3.5: v0 = 15.3 − 0.0615·SSVI [m/h], k = 0.426 − 0.00384·SSVI + 0.0000543·SSVI² [L/g] —
 *   recalled from memory [M] by the project lead, not checked against the paper. An earlier
 *   version (also [M]) had the signs of both SSVI terms of k swapped, which made k fall and
 *   settling improve as the sludge worsened — physically wrong, hence this form. k has its
 *   minimum at SSVI = 0.00384/(2·0.0000543) ≈ 35.4 mL/g and rises above it; v0 reaches zero
 *   at SSVI = 15.3/0.0615 ≈ 248.8 mL/g. Its validity range is
 *   {@link WAHLBERG_KEINATH_RANGE_mLg} (35–220 mL/g, our choice: k rising, v0 ≥ 1.77 m/h);
 *   outside it the result carries an 'extrapolated' reason, and where v0 ≤ 0 it is unavailable.
 * Coefficients marked [M] make the result 'estimated'. A correlation that yields v0 ≤ 0 or
 * k ≤ 0 at the given index is outside its range and the result is unavailable.
 */
export function vesilindFromIndex(index_mLg: number, correlation: SettlingCorrelationId): Figure<VesilindParams & { source: SettlingCorrelationId }> {
  if (!Number.isFinite(index_mLg) || index_mLg <= 0) return unavailable('settleability index must be a positive finite number');
  let v0: number;
  let k: number;
  const memo: string[] = [];
  switch (correlation) {
    case 'haertel-poepel-1992':
      v0 = 17.4 * Math.exp(-0.0113 * index_mLg) + 3.931;
      k = 1.043 - 0.9834 * Math.exp(-0.00581 * index_mLg);
      break;
    case 'daigger-roper-1985':
      v0 = 7.8;
      k = 0.148 + 0.0021 * index_mLg;
      memo.push('Daigger & Roper (1985) v0 = 7.80 m/h recalled from memory, not verified');
      break;
    case 'daigger-1995':
      v0 = Math.exp(1.871);
      k = 0.1646 + 0.001586 * index_mLg;
      memo.push('Daigger (1995) coefficients recalled from memory, not verified');
      break;
    case 'wahlberg-keinath-1988':
      v0 = 15.3 - 0.0615 * index_mLg;
      k = 0.426 - 0.00384 * index_mLg + 0.0000543 * index_mLg * index_mLg;
      memo.push('Wahlberg & Keinath (1988) coefficients recalled from memory, not verified');
      if (index_mLg < WAHLBERG_KEINATH_RANGE_mLg.min || index_mLg > WAHLBERG_KEINATH_RANGE_mLg.max) {
        memo.push(
          `SSVI ${index_mLg} mL/g is outside the range ${WAHLBERG_KEINATH_RANGE_mLg.min}–${WAHLBERG_KEINATH_RANGE_mLg.max} mL/g used for Wahlberg & Keinath (1988): extrapolated`,
        );
      }
      break;
  }
  if (!(v0 > 0) || !(k > 0)) {
    return unavailable(`${correlation} gives v0 = ${v0.toFixed(3)} m/h, k = ${k.toFixed(4)} L/g at ${CORRELATION_INDEX[correlation]} ${index_mLg} mL/g: outside the correlation's range`);
  }
  const value = { v0_mh: v0, k_Lg: k, source: correlation };
  return memo.length ? estimated(value, ...memo) : good(value);
}

export interface SettlingTestPoint {
  conc_gL: number;
  velocity_mh: number;
}

export interface VesilindFit extends VesilindParams {
  /** Coefficient of determination of ln v on X [-]. */
  r2: number;
  /** Number of points used. */
  n: number;
  /** Standard error of k [L/g] (ordinary least squares); null with two points. */
  kStdErr_Lg: number | null;
  /** Standard error of ln v0 [-], so v0 lies within v0·e^(±2·se) at about 95 %; null with two points. */
  lnV0StdErr: number | null;
}

/**
 * Vesilind parameters from a batch settling-test series (initial settling velocity at several
 * concentrations) by ordinary least squares of ln v on X (the linearisation used since
 * Vesilind 1968): ln v = ln v0 − k·X, with r² of the linear fit. Points with non-positive or
 * non-finite values are skipped (estimated, with the count). Unavailable with fewer than two
 * distinct concentrations or a non-positive k (velocity not falling with concentration);
 * estimated with only two points or when r² < minR2 (default 0.9, our own acceptance choice).
 * With three or more points it gives the standard errors of k and ln v0 (ordinary least squares).
 */
export function fitVesilind(points: readonly SettlingTestPoint[], minR2 = 0.9): Figure<VesilindFit> {
  const ok = points.filter((p) => Number.isFinite(p.conc_gL) && Number.isFinite(p.velocity_mh) && p.conc_gL > 0 && p.velocity_mh > 0);
  const reasons: string[] = [];
  if (ok.length < points.length) reasons.push(`${points.length - ok.length} settling-test point(s) with non-positive or invalid values ignored`);
  const n = ok.length;
  if (n < 2) return unavailable('at least two settling-test points are needed', ...reasons);
  let sx = 0;
  let sy = 0;
  for (const p of ok) {
    sx += p.conc_gL;
    sy += Math.log(p.velocity_mh);
  }
  const mx = sx / n;
  const my = sy / n;
  let sxx = 0;
  let sxy = 0;
  let syy = 0;
  for (const p of ok) {
    const dx = p.conc_gL - mx;
    const dy = Math.log(p.velocity_mh) - my;
    sxx += dx * dx;
    sxy += dx * dy;
    syy += dy * dy;
  }
  if (sxx <= 1e-12 * Math.max(1, mx * mx)) return unavailable('settling-test concentrations are all equal', ...reasons);
  const slope = sxy / sxx;
  const k = -slope;
  if (!(k > 0)) return unavailable('settling velocity does not fall with concentration (k ≤ 0)', ...reasons);
  const v0 = Math.exp(my - slope * mx);
  const r2 = syy === 0 ? 1 : (sxy * sxy) / (sxx * syy);
  if (n === 2) reasons.push('only two settling-test points: the fit is exact and r² says nothing');
  else if (r2 < minR2) reasons.push(`weak fit: r² = ${r2.toFixed(3)} < ${minR2}`);
  // OLS standard errors of slope and intercept (e.g. Draper & Smith, Applied Regression Analysis, 3rd ed. 1998, ch. 1 [M for the chapter]).
  const resid = n > 2 ? Math.max(0, syy - slope * sxy) / (n - 2) : null;
  const kStdErr_Lg = resid === null ? null : Math.sqrt(resid / sxx);
  const lnV0StdErr = resid === null ? null : Math.sqrt(resid * (1 / n + (mx * mx) / sxx));
  const value = { v0_mh: v0, k_Lg: k, r2, n, kStdErr_Lg, lnV0StdErr };
  return reasons.length ? estimated(value, ...reasons) : good(value);
}
