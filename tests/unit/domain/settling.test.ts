import { describe, expect, it } from 'vitest';
import { fitVesilind, vesilindFromIndex, vesilindVelocity_mh, WAHLBERG_KEINATH_RANGE_mLg } from '../../../shared/domain/settling.js';
import { mulberry32, uniform } from './prng.js';

describe('Vesilind fit from a settling-test series (least squares of ln v on X)', () => {
  it('recovers v0 and k exactly from noise-free data', () => {
    const p = { v0_mh: 8.2, k_Lg: 0.45 };
    const pts = [1.5, 2.5, 3.5, 5, 7].map((x) => ({ conc_gL: x, velocity_mh: vesilindVelocity_mh(x, p) }));
    const f = fitVesilind(pts);
    expect(f.quality).toBe('good');
    expect(f.value!.v0_mh).toBeCloseTo(8.2, 10);
    expect(f.value!.k_Lg).toBeCloseTo(0.45, 10);
    expect(f.value!.r2).toBeCloseTo(1, 12);
    expect(f.value!.n).toBe(5);
  });

  it('matches the hand-computed regression of a small series', () => {
    // ln v: X=2 → ln 4, X=4 → ln 2, X=6 → ln 1.2. Hand calculation: x̄ = 4, ȳ = (1.3863 + 0.6931 + 0.1823)/3 = 0.75392,
    // Sxy = (−2)(0.63237) + 0 + 2(−0.57160) = −2.40794, Sxx = 8 → slope = −0.300993, k = 0.300993 L/g,
    // ln v0 = 0.75392 + 0.300993·4 = 1.957893 → v0 = e^1.957893 = 7.0844 m/h.
    const f = fitVesilind([
      { conc_gL: 2, velocity_mh: 4 },
      { conc_gL: 4, velocity_mh: 2 },
      { conc_gL: 6, velocity_mh: 1.2 },
    ]);
    expect(f.value!.k_Lg).toBeCloseTo(0.300993, 5);
    expect(f.value!.v0_mh).toBeCloseTo(7.0844, 3);
    expect(f.value!.r2).toBeLessThan(1);
    expect(f.value!.r2).toBeGreaterThan(0.99);
  });

  it('flags weak, tiny or unphysical series', () => {
    expect(fitVesilind([{ conc_gL: 3, velocity_mh: 2 }]).quality).toBe('unavailable');
    expect(fitVesilind([{ conc_gL: 3, velocity_mh: 2 }, { conc_gL: 3, velocity_mh: 1 }]).quality).toBe('unavailable');
    expect(fitVesilind([{ conc_gL: 2, velocity_mh: 1 }, { conc_gL: 4, velocity_mh: 2 }]).quality).toBe('unavailable'); // k < 0
    expect(fitVesilind([{ conc_gL: 2, velocity_mh: 3 }, { conc_gL: 4, velocity_mh: 2 }]).quality).toBe('estimated'); // two points
    const rnd = mulberry32(7);
    const noisy = [1, 2, 3, 4, 5, 6].map((x) => ({ conc_gL: x, velocity_mh: 8 * Math.exp(-0.4 * x) * Math.exp(uniform(rnd, -0.8, 0.8)) }));
    const f = fitVesilind(noisy, 0.999);
    expect(f.quality).toBe('estimated');
    expect(f.reasons.join(' ')).toMatch(/r²/);
    const withZero = fitVesilind([{ conc_gL: 2, velocity_mh: 4 }, { conc_gL: 4, velocity_mh: 2 }, { conc_gL: 6, velocity_mh: 1.2 }, { conc_gL: 8, velocity_mh: 0 }]);
    expect(withZero.quality).toBe('estimated');
    expect(withZero.value!.n).toBe(3);
  });
});

describe('SVI / SSVI correlations (coefficients as documented in settling.ts; [M] where marked)', () => {
  it('Härtel & Pöpel 1992 at SVI 100 (Modelica WasteWater Haertel.mo form) [V]', () => {
    // v0 = 17.4·e^(−1.13) + 3.931 = 17.4·0.323033 + 3.931 = 9.5518; k = 1.043 − 0.9834·e^(−0.581) = 1.043 − 0.9834·0.559339 = 0.49294
    const r = vesilindFromIndex(100, 'haertel-poepel-1992');
    expect(r.quality).toBe('good');
    expect(r.value!.v0_mh).toBeCloseTo(9.5518, 3);
    expect(r.value!.k_Lg).toBeCloseTo(0.49294, 4);
  });

  it('Daigger & Roper 1985 at SVI 150: k = 0.148 + 0.315 = 0.463 [V]; v0 = 7.80 [M] → estimated', () => {
    const r = vesilindFromIndex(150, 'daigger-roper-1985');
    expect(r.value!.k_Lg).toBeCloseTo(0.463, 10);
    expect(r.value!.v0_mh).toBe(7.8);
    expect(r.quality).toBe('estimated');
    expect(r.reasons.join(' ')).toMatch(/memory/);
  });

  it('Daigger 1995 at SVI 200: v0 = e^1.871 = 6.4945 m/h, k = 0.1646 + 0.3172 = 0.4818 [M]', () => {
    const r = vesilindFromIndex(200, 'daigger-1995');
    expect(r.value!.v0_mh).toBeCloseTo(6.4945, 3);
    expect(r.value!.k_Lg).toBeCloseTo(0.4818, 10);
    expect(r.quality).toBe('estimated');
  });

  // Wahlberg & Keinath (1988) in the form recalled from memory [M] (settling.ts): v0 = 15.3 − 0.0615·SSVI,
  // k = 0.426 − 0.00384·SSVI + 0.0000543·SSVI². Hand values are ours.
  it('Wahlberg & Keinath 1988 at SSVI 80: v0 = 15.3 − 4.92 = 10.38, k = 0.426 − 0.3072 + 0.34752 = 0.46632 [M]', () => {
    const r = vesilindFromIndex(80, 'wahlberg-keinath-1988');
    expect(r.value!.v0_mh).toBeCloseTo(10.38, 10);
    expect(r.value!.k_Lg).toBeCloseTo(0.46632, 10);
    expect(r.quality).toBe('estimated');
    expect(r.reasons.join(' ')).not.toMatch(/extrapolated/);
  });

  it('Wahlberg & Keinath 1988: k rises and v0 falls with SSVI across the validity range 35–220 mL/g', () => {
    expect(WAHLBERG_KEINATH_RANGE_mLg).toEqual({ min: 35, max: 220 });
    let prev = vesilindFromIndex(35.5, 'wahlberg-keinath-1988').value!;
    for (let s = 36; s <= 220; s += 1) {
      const cur = vesilindFromIndex(s, 'wahlberg-keinath-1988').value!;
      expect(cur.k_Lg, `k at SSVI ${s}`).toBeGreaterThan(prev.k_Lg);
      expect(cur.v0_mh, `v0 at SSVI ${s}`).toBeLessThan(prev.v0_mh);
      prev = cur;
    }
    // at SSVI 200 by hand: v0 = 15.3 − 12.3 = 3.0 m/h, k = 0.426 − 0.768 + 2.172 = 1.830 L/g
    const r200 = vesilindFromIndex(200, 'wahlberg-keinath-1988');
    expect(r200.value!.v0_mh).toBeCloseTo(3.0, 10);
    expect(r200.value!.k_Lg).toBeCloseTo(1.83, 10);
  });

  it('Wahlberg & Keinath 1988 outside 35–220 mL/g: estimated and marked extrapolated; unavailable once v0 ≤ 0', () => {
    for (const s of [25, 230, 245]) {
      const r = vesilindFromIndex(s, 'wahlberg-keinath-1988');
      expect(r.quality).toBe('estimated');
      expect(r.value).not.toBeNull();
      expect(r.reasons.join(' ')).toMatch(/outside the range 35–220 mL\/g.*extrapolated/);
    }
    // v0 = 15.3 − 0.0615·250 = −0.075 m/h
    const r250 = vesilindFromIndex(250, 'wahlberg-keinath-1988');
    expect(r250.quality).toBe('unavailable');
    expect(r250.value).toBeNull();
    expect(r250.reasons.join(' ')).toMatch(/v0 = -0\.075/);
  });

  it('is unavailable (not NaN) outside a correlation’s range', () => {
    const r = vesilindFromIndex(300, 'wahlberg-keinath-1988'); // v0 = 15.3 − 18.45 < 0
    expect(r.quality).toBe('unavailable');
    expect(r.value).toBeNull();
    expect(vesilindFromIndex(0, 'daigger-1995').quality).toBe('unavailable');
    expect(vesilindFromIndex(Number.NaN, 'haertel-poepel-1992').value).toBeNull();
  });
});
