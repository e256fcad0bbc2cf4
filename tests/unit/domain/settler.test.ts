import { describe, expect, it } from 'vitest';
import {
  BSM1_SETTLER,
  BSM1_TAKACS,
  blanketHeight_m,
  settlerDerivatives,
  settlerMass_kg,
  solveSettlerSteadyState,
  stepSettler,
  takacsVelocity_mh,
  type SettlerConfig,
} from '../../../shared/domain/settler.js';
import { DomainValidationError } from '../../../shared/domain/errors.js';

// BSM1 open-loop steady state: Alex et al. (2008), BSM1 technical report (IWA Taskgroup),
// settler profile table; the same values are asserted by the public bsm2-python tests
// (ttronas/bsm2-python, tests/bsm1_ol_test.py). Published in g/m³ top → bottom.
const BSM1_OL_FEED = { feedFlow_m3h: 36892 / 24, feedTss_gL: 3.26984, underflowFlow_m3h: 18831 / 24 };
const BSM1_OL_PROFILE_gm3 = [12.4969, 18.1132, 29.5402, 68.9781, 356.0747, 356.0747, 356.0747, 356.0747, 356.0747, 6393.9844];

describe('Takács layered settler (BSM1 defaults)', () => {
  it('reproduces the BSM1 open-loop steady-state profile within 1 % per layer (Alex et al. 2008)', () => {
    const r = solveSettlerSteadyState(BSM1_SETTLER, BSM1_OL_FEED);
    expect(r.converged).toBe(true);
    expect(r.layers_gL).toHaveLength(10);
    r.layers_gL.forEach((x, i) => {
      const ref = BSM1_OL_PROFILE_gm3[i]! / 1000;
      expect(Math.abs(x - ref) / ref, `layer ${i + 1}`).toBeLessThan(0.01);
    });
    expect(r.effluentTss_gL).toBe(r.layers_gL[0]);
    expect(r.underflowTss_gL).toBe(r.layers_gL[9]);
  });

  it('converges to the same BSM1 profile from an empty settler', () => {
    const r = solveSettlerSteadyState(BSM1_SETTLER, BSM1_OL_FEED, { initial_gL: new Float64Array(10) });
    expect(r.converged).toBe(true);
    expect(Math.abs(r.layers_gL[9]! - 6.3939844) / 6.3939844).toBeLessThan(0.01);
  });

  it('closes the solids balance at steady state: Qf·Xf = Qe·Xe + Qu·Xu', () => {
    const r = solveSettlerSteadyState(BSM1_SETTLER, BSM1_OL_FEED);
    const qe = BSM1_OL_FEED.feedFlow_m3h - BSM1_OL_FEED.underflowFlow_m3h;
    const inFlux = BSM1_OL_FEED.feedFlow_m3h * BSM1_OL_FEED.feedTss_gL;
    const outFlux = qe * r.effluentTss_gL + BSM1_OL_FEED.underflowFlow_m3h * r.underflowTss_gL;
    expect(Math.abs(outFlux - inFlux) / inFlux).toBeLessThan(1e-8);
  });

  it('Takács velocity: zero below Xmin, capped at v0′, double exponential in between', () => {
    const xf = 3.26984;
    const xmin = BSM1_TAKACS.fns * xf;
    expect(takacsVelocity_mh(xmin * 0.5, xf, BSM1_TAKACS)).toBe(0);
    // the unclipped curve peaks at d = ln(rp/rh)/(rp − rh) ≈ 0.70 g/L above Xmin at ≈ 10.5 m/h > v0′
    expect(takacsVelocity_mh(xmin + Math.log(2.86 / 0.576) / (2.86 - 0.576), xf, BSM1_TAKACS)).toBeCloseTo(250 / 24, 12);
    // At 4 g/L by hand: 474/24·(e^(−0.576·(4−xmin)) − e^(−2.86·(4−xmin)))
    const d = 4 - xmin;
    expect(takacsVelocity_mh(4, xf, BSM1_TAKACS)).toBeCloseTo((474 / 24) * (Math.exp(-0.576 * d) - Math.exp(-2.86 * d)), 12);
  });

  it('conserves mass during transients: dM/dt = Qf·Xf − Qe·X1 − Qu·Xn', () => {
    const x = Float64Array.from([0.02, 0.05, 0.2, 1, 2, 3.5, 4, 5, 7, 9]);
    const d = settlerDerivatives(BSM1_SETTLER, BSM1_OL_FEED, x);
    const h = BSM1_SETTLER.depth_m / BSM1_SETTLER.layers;
    const dM = d.reduce((s, v) => s + v, 0) * h * BSM1_SETTLER.area_m2;
    const qe = BSM1_OL_FEED.feedFlow_m3h - BSM1_OL_FEED.underflowFlow_m3h;
    const expected = BSM1_OL_FEED.feedFlow_m3h * BSM1_OL_FEED.feedTss_gL - qe * x[0]! - BSM1_OL_FEED.underflowFlow_m3h * x[9]!;
    expect(Math.abs(dM - expected) / Math.abs(expected)).toBeLessThan(1e-9);
  });

  it('stepSettler with large dt stays finite and non-negative and moves towards steady state', () => {
    const x = new Float64Array(10).fill(3.26984);
    stepSettler(BSM1_SETTLER, BSM1_OL_FEED, x, 500);
    for (const v of x) {
      expect(Number.isFinite(v)).toBe(true);
      expect(v).toBeGreaterThanOrEqual(0);
    }
    expect(Math.abs(x[9]! - 6.3939844) / 6.3939844).toBeLessThan(0.01);
  });

  it('blanket height is interpolated between layer centres', () => {
    const cfg: SettlerConfig = { ...BSM1_SETTLER };
    // layer centres (height above floor) for 10 × 0.4 m: 3.8, 3.4, …, 0.2 m
    const layers = [0.01, 0.01, 0.01, 0.01, 0.3, 0.3, 0.3, 0.5, 1.5, 6];
    // first layer ≥ 1 g/L is layer 9 (centre 0.6 m), layer 8 above it (centre 1.0 m) holds 0.5
    expect(blanketHeight_m(cfg, layers, 1)).toBeCloseTo(0.6 + 0.4 * (1.5 - 1) / (1.5 - 0.5), 12);
    expect(blanketHeight_m(cfg, layers, 100)).toBe(0);
    expect(blanketHeight_m(cfg, layers, 0.005)).toBe(4);
  });

  it('settler mass is Σ X·A·h', () => {
    const layers = new Array(10).fill(2);
    expect(settlerMass_kg(BSM1_SETTLER, layers)).toBeCloseTo(2 * 1500 * 4, 9);
  });

  it('rejects an underflow larger than the feed with a typed error', () => {
    expect(() => settlerDerivatives(BSM1_SETTLER, { feedFlow_m3h: 10, feedTss_gL: 3, underflowFlow_m3h: 11 }, new Float64Array(10))).toThrow(DomainValidationError);
  });
});
