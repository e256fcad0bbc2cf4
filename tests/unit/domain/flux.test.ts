import { describe, expect, it } from 'vitest';
import { lambertWm1, limitingFlux, rasConcMaxFlux_gL, rasConcMaxRuleOfThumb_gL, totalFlux_kgm2h } from '../../../shared/domain/flux.js';
import { SETTLING_CORRELATIONS, vesilindFromIndex, WAHLBERG_KEINATH_RANGE_mLg, type SettlingCorrelationId } from '../../../shared/domain/settling.js';
import { mulberry32, uniform } from './prng.js';

describe('Lambert W lower branch', () => {
  it('satisfies w·e^w = x with w ≤ −1 across the domain (definition, Corless et al. 1996)', () => {
    for (const x of [-1 / Math.E, -0.3678, -0.35, -0.3, -0.25, -0.2, -0.1, -1e-2, -1e-4, -1e-8, -1e-15]) {
      const w = lambertWm1(x)!;
      expect(w).not.toBeNull();
      expect(w).toBeLessThanOrEqual(-1);
      expect(Math.abs(w * Math.exp(w) - x)).toBeLessThan(1e-13 * Math.max(1, Math.abs(x)) + 1e-16);
    }
  });

  it('matches known values: W₋₁(−1/e) = −1, W₋₁(−ln2/2) = −ln 4', () => {
    expect(lambertWm1(-1 / Math.E)).toBeCloseTo(-1, 6);
    // (−ln 4)·e^(−ln 4) = −ln4/4 = −ln2/2
    expect(lambertWm1(-Math.LN2 / 2)).toBeCloseTo(-Math.log(4), 12);
  });

  it('is null outside [−1/e, 0)', () => {
    expect(lambertWm1(0)).toBeNull();
    expect(lambertWm1(0.1)).toBeNull();
    expect(lambertWm1(-0.4)).toBeNull();
    expect(lambertWm1(Number.NaN)).toBeNull();
  });
});

/** Brute force: minimum of G(X) = (v0·e^(−kX) + u)·X on X > 2/k by a fine grid plus local refinement. */
function bruteForceMin(u: number, v0: number, k: number): { x: number; g: number } {
  const p = { v0_mh: v0, k_Lg: k };
  let best = { x: 0, g: Infinity };
  const lo = 2 / k;
  const hi = 60 / k;
  const n = 200_000;
  for (let i = 0; i <= n; i++) {
    const x = lo + ((hi - lo) * i) / n;
    const g = totalFlux_kgm2h(x, u, p);
    if (g < best.g) best = { x, g };
  }
  let step = (hi - lo) / n;
  for (let r = 0; r < 60; r++) {
    for (const x of [best.x - step, best.x + step]) {
      const g = totalFlux_kgm2h(x, u, p);
      if (g < best.g) best = { x, g };
    }
    step /= 2;
  }
  return best;
}

describe('limiting flux by the Lambert-W closed form (Keinath et al. 1977 solids-flux theory)', () => {
  const cases = [
    { u: 0.3, v0: 7.8, k: 0.4 },
    { u: 0.6, v0: 7.8, k: 0.4 },
    { u: 0.1, v0: 10, k: 0.3 },
    { u: 1.0, v0: 12, k: 0.6 },
    { u: 0.05, v0: 5, k: 0.8 },
    { u: 1.2, v0: 9, k: 0.25 },
  ];
  for (const c of cases) {
    it(`equals the brute-force minimum of the total flux curve for u=${c.u}, v0=${c.v0}, k=${c.k}`, () => {
      const lf = limitingFlux(c.u, { v0_mh: c.v0, k_Lg: c.k });
      expect(lf.quality).toBe('good');
      const bf = bruteForceMin(c.u, c.v0, c.k);
      expect(Math.abs(lf.value!.limitingFlux_kgm2h - bf.g) / bf.g).toBeLessThan(1e-9);
      expect(Math.abs(lf.value!.limitingConc_gL - bf.x) / bf.x).toBeLessThan(1e-5);
      expect(lf.value!.maxUnderflowConc_gL).toBeCloseTo(bf.g / c.u, 6);
      // X_L solves e^(−kX)(kX − 1) = u/v0 on the branch X > 2/k
      const xl = lf.value!.limitingConc_gL;
      expect(xl).toBeGreaterThan(2 / c.k);
      expect(Math.exp(-c.k * xl) * (c.k * xl - 1)).toBeCloseTo(c.u / c.v0, 12);
    });
  }

  it('reports the validity condition u < v0·e⁻² as a reason instead of NaN', () => {
    const p = { v0_mh: 7.8, k_Lg: 0.4 };
    const uMax = 7.8 * Math.exp(-2);
    const bad = limitingFlux(uMax * 1.01, p);
    expect(bad.quality).toBe('unavailable');
    expect(bad.value).toBeNull();
    expect(bad.reasons.join(' ')).toMatch(/v0·e⁻²/);
    expect(limitingFlux(uMax * 0.99, p).quality).toBe('good');
    expect(limitingFlux(0, p).quality).toBe('unavailable');
    expect(rasConcMaxFlux_gL(uMax * 2, p).value).toBeNull();
  });
});

describe('maximum return concentration', () => {
  // Rule of thumb, common practice of the trade: X_R,max ≈ 1200/SVI g/L.
  it('rule of thumb: 1200/SVI, factor is a parameter (common practice of the trade)', () => {
    expect(rasConcMaxRuleOfThumb_gL(120).value).toBeCloseTo(10, 12);
    expect(rasConcMaxRuleOfThumb_gL(150, 1000).value).toBeCloseTo(6.6667, 4);
    expect(rasConcMaxRuleOfThumb_gL(0).quality).toBe('unavailable');
  });

  it('property: higher SVI never raises the rule-of-thumb X_R,max (200 seeded cases)', () => {
    const rnd = mulberry32(1);
    for (let i = 0; i < 200; i++) {
      const a = uniform(rnd, 20, 1000);
      const b = a + uniform(rnd, 0, 200);
      const f = uniform(rnd, 500, 2000);
      expect(rasConcMaxRuleOfThumb_gL(b, f).value!).toBeLessThanOrEqual(rasConcMaxRuleOfThumb_gL(a, f).value!);
    }
  });

  // Wahlberg & Keinath (1988) takes part only inside its validity range (settling.ts, [M] coefficients);
  // the other correlations over the whole contract range of 20–1000 mL/g.
  const sviRange = (c: SettlingCorrelationId): [number, number] =>
    c === 'wahlberg-keinath-1988' ? [WAHLBERG_KEINATH_RANGE_mLg.min, WAHLBERG_KEINATH_RANGE_mLg.max] : [20, 1000];
  for (const corr of SETTLING_CORRELATIONS) {
    it(`property: higher SVI never raises the flux-based X_R,max with ${corr} (200 seeded cases)`, () => {
      const [lo, hi] = sviRange(corr);
      const rnd = mulberry32(42);
      let checked = 0;
      for (let i = 0; i < 200; i++) {
        const svi = uniform(rnd, lo, hi - 1);
        const svi2 = Math.min(hi, svi + uniform(rnd, 1, (hi - lo) / 4));
        const u = uniform(rnd, 0.05, 1.0);
        const pa = vesilindFromIndex(svi, corr).value!;
        const pb = vesilindFromIndex(svi2, corr).value!;
        const a = rasConcMaxFlux_gL(u, pa);
        const b = rasConcMaxFlux_gL(u, pb);
        if (a.value === null) {
          // once u exceeds v0·e⁻² at the lower SVI it cannot be valid at a higher one for these correlations (v0 does not rise)
          expect(b.value).toBeNull();
          continue;
        }
        if (b.value === null) continue;
        expect(b.value).toBeLessThanOrEqual(a.value * (1 + 1e-12));
        checked++;
      }
      expect(checked).toBeGreaterThan(100);
    });
  }

  // Replaces a test that pinned the swapped-sign Wahlberg & Keinath k (which made X_R,max rise with SSVI).
  it('Wahlberg & Keinath 1988 [M]: flux-based X_R,max falls from SSVI 60 to 100 to 150 at u = 0.4 m/h', () => {
    const u = 0.4;
    const at = (s: number) => rasConcMaxFlux_gL(u, vesilindFromIndex(s, 'wahlberg-keinath-1988').value!).value!;
    expect(at(100)).toBeLessThan(at(60));
    expect(at(150)).toBeLessThan(at(100));
    expect(vesilindFromIndex(100, 'wahlberg-keinath-1988').quality).toBe('estimated');
  });
});
