/**
 * Vesilind settling parameters from the plant's own lab data: each settleability test (SVI,
 * DSVI, SSVI) gives one point of settling velocity against concentration, and fitVesilind
 * (settling.ts) fits v0 and k through them with its standard errors.
 */
import { joinSeries, slopePerHour, type MinuteSeries } from './balance/series.js';
import { lambertWm1 } from './flux.js';
import { estimated, unavailable, type Figure } from './quality.js';
import { fitVesilind, type SettlingTestPoint, type VesilindFit } from './settling.js';

/** One settleability test as the lab recorded it. */
export interface LabSettlingTest {
  kind: 'SVI' | 'DSVI' | 'SSVI';
  /** Settled volume after 30 min [mL/L] (of the diluted sample for a DSVI). */
  settledVolume_mLL: number;
  /** MLSS of the undiluted sample [g/L]. */
  mlss_gL: number;
  /** Dilution factor ≥ 1 (DSVI). */
  dilutionFactor?: number;
  sampledAt_ms: number;
}

/** The test duration of every SVI-family test, 30 min (Standard Methods 2710 D). */
const TEST_H = 0.5;

/**
 * One settling point from a settleability test: the concentration in the cylinder X = MLSS/
 * dilution, and the mean interface velocity over the 30 min, v = H·(1 − SV30/1000)/0.5 h, with H
 * the height of the 1 L mark of the cylinder. Our approximation, not a published method: the
 * 30-min mean includes the slowing into compression, so it is a lower bound of the zone-settling
 * velocity and a fit through such points reads the sludge as settling worse than it does (the
 * safe side for the thickening margin). Null for a test with no settled interface (SV30 ≥ 1000).
 */
export function settlingPointFromTest(t: LabSettlingTest, cylinderHeight_m: number): SettlingTestPoint | null {
  const f = t.dilutionFactor ?? 1;
  if (!(t.settledVolume_mLL > 0 && t.settledVolume_mLL < 1000) || !(t.mlss_gL > 0) || !(f >= 1) || !(cylinderHeight_m > 0)) return null;
  return { conc_gL: t.mlss_gL / (t.kind === 'DSVI' ? f : 1), velocity_mh: (cylinderHeight_m * (1 - t.settledVolume_mLL / 1000)) / TEST_H };
}

export interface PlantSettlingFit {
  fit: Figure<VesilindFit>;
  /** Number of tests that gave a point. */
  n: number;
  /** Oldest and newest test used (epoch ms); null without any. */
  from_ms: number | null;
  to_ms: number | null;
}

/**
 * Vesilind v0 and k fitted to the plant's settleability tests (settlingPointFromTest, then
 * fitVesilind with its standard errors), with the number of points and their date range. Always
 * estimated at best: the points are 30-min mean velocities (see settlingPointFromTest).
 */
export function plantSettlingFit(tests: readonly LabSettlingTest[], cylinderHeight_m: number): PlantSettlingFit {
  const used = tests.flatMap((t) => {
    const p = settlingPointFromTest(t, cylinderHeight_m);
    return p ? [{ p, at: t.sampledAt_ms }] : [];
  });
  const n = used.length;
  const from_ms = n ? Math.min(...used.map((u) => u.at)) : null;
  const to_ms = n ? Math.max(...used.map((u) => u.at)) : null;
  if (n === 0) return { fit: unavailable('no settleability tests in the lab results of the fit window'), n, from_ms, to_ms };
  const f = fitVesilind(used.map((u) => u.p));
  const note = `fitted to ${n} settleability test(s): velocities are the 30-min mean interface velocities of the tests with the 1 L mark at ${cylinderHeight_m} m (our approximation; a lower bound of the zone-settling velocity)`;
  const fit: Figure<VesilindFit> = f.value === null ? f : estimated(f.value, ...f.reasons, note);
  return { fit, n, from_ms, to_ms };
}

/** One period of a clarifier with a stable blanket well above the floor, averaged over the period. */
export interface BlanketReading {
  /** End of the period (epoch ms). */
  t_ms: number;
  /** Underflow rate u = (Q_R + Q_W)/A [m/h]. */
  underflowRate_mh: number;
  /** Underflow (RAS) concentration X_R [g/L]. */
  underflowTss_gL: number;
}

export interface BlanketReadingRules {
  /** Length of one period [min]. */
  window_min: number;
  /** A blanket moving faster than this (least-squares slope over the period) is not stable [m/h]. */
  maxRate_m_h: number;
  /** The blanket must stand at least this share of the side-water depth above the floor [-]. */
  minLevelFraction: number;
}

/** Our own defaults for picking stable-blanket periods [ours]. */
export const DEFAULT_BLANKET_READING_RULES: BlanketReadingRules = Object.freeze({ window_min: 60, maxRate_m_h: 0.05, minLevelFraction: 0.25 });

/**
 * Stable-blanket periods of one clarifier from its minute series (blanket level [m], underflow
 * TSS [g/L], RAS and WAS flows [m³/h]): consecutive windows of `window_min` in which every minute
 * has all four, the blanket's least-squares slope stays within ±maxRate_m_h, and its mean level
 * is at least minLevelFraction of the side-water depth (a blanket that deep means a critically
 * loaded thickening zone in solids-flux terms; a thin layer on the floor of an underloaded
 * clarifier says nothing about the limiting flux). Each period gives its mean u = (Q_R + Q_W)/A
 * and mean X_R.
 */
export function stableBlanketReadings(
  s: { level_m: MinuteSeries; underflowTss_gL: MinuteSeries; rasFlow_m3h: MinuteSeries; wasFlow_m3h: MinuteSeries },
  clarifier: { area_m2: number; sideWaterDepth_m: number },
  rules: BlanketReadingRules = DEFAULT_BLANKET_READING_RULES,
): BlanketReading[] {
  if (!(clarifier.area_m2 > 0) || !(clarifier.sideWaterDepth_m > 0)) return [];
  const joined = joinSeries([s.level_m, s.underflowTss_gL, s.rasFlow_m3h, s.wasFlow_m3h], (v) => v.length);
  const minutes = [...joined.keys()].sort((a, b) => a - b);
  if (minutes.length === 0) return [];
  const w_ms = rules.window_min * 60_000;
  const out: BlanketReading[] = [];
  let start = Math.floor(minutes[0]! / w_ms) * w_ms;
  const last = minutes[minutes.length - 1]!;
  for (; start <= last; start += w_ms) {
    const inWin = minutes.filter((t) => t >= start && t < start + w_ms);
    // Every minute of the period present (a gap may hide a moving blanket).
    if (inWin.length < rules.window_min) continue;
    const level = new Map(inWin.map((t) => [t, s.level_m.get(t)!]));
    const rate = slopePerHour(level);
    const mean = (m: MinuteSeries) => inWin.reduce((a, t) => a + m.get(t)!, 0) / inWin.length;
    const lv = mean(s.level_m);
    if (rate === null || Math.abs(rate) > rules.maxRate_m_h || lv < rules.minLevelFraction * clarifier.sideWaterDepth_m) continue;
    const u = (mean(s.rasFlow_m3h) + mean(s.wasFlow_m3h)) / clarifier.area_m2;
    const xr = mean(s.underflowTss_gL);
    if (u > 0 && xr > 0) out.push({ t_ms: start + w_ms, underflowRate_mh: u, underflowTss_gL: xr });
  }
  return out;
}

export type OperatingSettlingFit = PlantSettlingFit;

/** k·X_R,max = z²/(z − 1) with z = 1 − W₋₁(−e·u/v0): the limiting-flux relation free of k (see operatingSettlingFit); null at or above u = v0·e⁻². */
function kTimesXrMax(u_mh: number, v0_mh: number): number | null {
  const w = lambertWm1((-Math.E * u_mh) / v0_mh);
  if (w === null) return null;
  const z = 1 - w;
  return z > 2 ? (z * z) / (z - 1) : null;
}

/**
 * Vesilind v0 and k from the plant's operation (stableBlanketReadings), beside the fit to its
 * lab tests. In a critically loaded clarifier with a stable blanket the underflow runs at the
 * limiting flux, X_R = G_L/u (solids-flux theory, Keinath et al. 1977). With Vesilind settling
 * the limiting layer lies at z = k·X_L = 1 − W₋₁(−e·u/v0) (flux.ts) and G_L/u = X_L·(v0·e^(−z) + u)/u,
 * which the tangent condition e^(−z)·(z − 1) = u/v0 turns into k·X_R = z²/(z − 1): a curve of X_R
 * against u whose shape is set by v0 and whose scale by 1/k.
 *
 * Fitted by least squares of ln X_R (the measured, noisy quantity; relative errors): for a given
 * v0 the best ln k is the mean of ln(z²/(z − 1)) − ln X_R in closed form, and v0 is found by a
 * golden-section search on ln v0 above e²·max u. Standard errors from the Gauss–Newton
 * approximation at the optimum, σ²·(JᵀJ)⁻¹ with σ² = S/(n − 2) (Bates & Watts 1988, Nonlinear
 * Regression Analysis, ch. 2 [M]). Not fitVesilind on converted points: the points' concentration
 * X_L = X_R·(z − 1)/z carries X_R's noise into the regressor, and ordinary least squares of ln v
 * on X then reads k low (errors in variables; measured: −4 % at 3 % noise). Always estimated: it
 * rests on the critical-loading assumption.
 */
export function operatingSettlingFit(readings: readonly BlanketReading[]): OperatingSettlingFit {
  const ok = readings.filter((r) => r.underflowRate_mh > 0 && r.underflowTss_gL > 0 && Number.isFinite(r.underflowRate_mh) && Number.isFinite(r.underflowTss_gL));
  const n = ok.length;
  const from_ms = n ? Math.min(...ok.map((r) => r.t_ms)) : null;
  const to_ms = n ? Math.max(...ok.map((r) => r.t_ms)) : null;
  const none = (why: string): OperatingSettlingFit => ({ fit: unavailable(why), n, from_ms, to_ms });
  if (n === 0) return none('no period with a stable blanket deep enough to read the limiting flux');
  const us = ok.map((r) => r.underflowRate_mh);
  if (n < 3 || Math.max(...us) - Math.min(...us) <= 1e-6 * Math.max(...us)) return none(`${n} stable-blanket period(s) over one underflow rate: at least three at different rates are needed`);
  const lnX = ok.map((r) => Math.log(r.underflowTss_gL));
  // For ln v0: ln k and the residual sum of squares (null where a reading has no limiting flux).
  const at = (lnV0: number): { lnK: number; s: number; lnG: number[] } | null => {
    const lnG: number[] = [];
    for (const u of us) {
      const g = kTimesXrMax(u, Math.exp(lnV0));
      if (g === null) return null;
      lnG.push(Math.log(g));
    }
    const lnK = lnG.reduce((a, g, i) => a + g - lnX[i]!, 0) / n;
    return { lnK, s: lnG.reduce((a, g, i) => a + (lnX[i]! - g + lnK) ** 2, 0), lnG };
  };
  const lo0 = Math.log(Math.E ** 2 * Math.max(...us)) + 1e-9;
  const hi0 = lo0 + Math.log(1000);
  const sOf = (x: number) => at(x)?.s ?? Infinity;
  // Golden-section search for the least residual sum on ln v0 ∈ (lo, hi).
  const phi = (Math.sqrt(5) - 1) / 2;
  let a = lo0;
  let b = hi0;
  let c = b - phi * (b - a);
  let d = a + phi * (b - a);
  let fc = sOf(c);
  let fd = sOf(d);
  for (let i = 0; i < 200 && b - a > 1e-10; i++) {
    if (fc < fd) {
      b = d;
      d = c;
      fd = fc;
      c = b - phi * (b - a);
      fc = sOf(c);
    } else {
      a = c;
      c = d;
      fc = fd;
      d = a + phi * (b - a);
      fd = sOf(d);
    }
  }
  const lnV0 = (a + b) / 2;
  const best = at(lnV0);
  if (best === null) return none('the readings do not fit a limiting flux');
  if (lnV0 - lo0 < 1e-6 || hi0 - lnV0 < 1e-6) return none(`v0 runs to the edge of its range (${Math.exp(lnV0).toFixed(3)} m/h): the readings do not fit a limiting-flux curve`);
  // Gauss–Newton covariance of (ln v0, ln k): residual rᵢ = ln X_R,i − ln gᵢ(v0) + ln k.
  const h = 1e-5;
  const up = at(lnV0 + h);
  const dn = at(lnV0 - h);
  if (up === null || dn === null) return none('the readings do not fit a limiting flux');
  const jv = best.lnG.map((_, i) => -(up.lnG[i]! - dn.lnG[i]!) / (2 * h));
  const svv = jv.reduce((s, x) => s + x * x, 0);
  const svk = jv.reduce((s, x) => s + x, 0);
  const det = svv * n - svk * svk;
  const sigma2 = best.s / (n - 2);
  if (!(det > 0)) return none('the underflow rates do not spread enough to separate v0 from k');
  const lnV0StdErr = Math.sqrt((sigma2 * n) / det);
  const lnKStdErr = Math.sqrt((sigma2 * svv) / det);
  const k_Lg = Math.exp(best.lnK);
  let syy = 0;
  const mean = lnX.reduce((s, x) => s + x, 0) / n;
  for (const x of lnX) syy += (x - mean) ** 2;
  const r2 = syy > 0 ? Math.max(0, 1 - best.s / syy) : 1;
  const value: VesilindFit = { v0_mh: Math.exp(lnV0), k_Lg, r2, n, kStdErr_Lg: k_Lg * lnKStdErr, lnV0StdErr };
  return {
    fit: estimated(value, `fitted to ${n} stable-blanket period(s) at the limiting flux X_R = G_L/u (Keinath et al. 1977; critical loading assumed)`),
    n,
    from_ms,
    to_ms,
  };
}
