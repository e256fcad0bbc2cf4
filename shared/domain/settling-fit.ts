/**
 * Vesilind settling parameters from the plant's own lab data: each settleability test (SVI,
 * DSVI, SSVI) gives one point of settling velocity against concentration, and fitVesilind
 * (settling.ts) fits v0 and k through them with its standard errors.
 */
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
