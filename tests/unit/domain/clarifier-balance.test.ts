import { describe, expect, it } from 'vitest';
import { clarifierBalanceResidual_kgh, effluentFlow_m3h, recycleRatio, requiredRasConc_gL, requiredRasConcSimple_gL } from '../../../shared/domain/clarifier-balance.js';
import { mulberry32, uniform } from './prng.js';

describe('steady-state clarifier solids balance (Q+QR)·X = (QR+QW)·XR + Qe·Xe', () => {
  it('simple form X·(Q+QR)/QR by hand: Q = 1000, QR = 600, X = 3 → 8 g/L, R = 0.6', () => {
    expect(requiredRasConcSimple_gL(1000, 600, 3).value).toBeCloseTo(8, 12);
    expect(recycleRatio(1000, 600).value).toBeCloseTo(0.6, 12);
  });

  it('full form by hand: Q = 1000, QR = 600, QW = 20, X = 3, Xe = 0.01 → (4800 − 9.8)/620 = 7.72613 g/L', () => {
    const r = requiredRasConc_gL({ influentFlow_m3h: 1000, rasFlow_m3h: 600, mlss_gL: 3, wasFlow_m3h: 20, effluentTss_gL: 0.01 });
    expect(r.value).toBeCloseTo(4790.2 / 620, 10);
  });

  it('property: the balance closes to 1e-9 relative for 200 seeded cases', () => {
    const rnd = mulberry32(2026);
    for (let i = 0; i < 200; i++) {
      const q = uniform(rnd, 10, 50_000);
      const qr = uniform(rnd, 0.2, 1.5) * q;
      const qw = uniform(rnd, 0, 0.03) * q;
      const x = uniform(rnd, 0.5, 8);
      const xe = uniform(rnd, 0, 0.05);
      const xr = requiredRasConc_gL({ influentFlow_m3h: q, rasFlow_m3h: qr, mlss_gL: x, wasFlow_m3h: qw, effluentTss_gL: xe }).value!;
      const qe = effluentFlow_m3h(q, qw).value!;
      const lhs = (q + qr) * x;
      const rhs = (qr + qw) * xr + qe * xe;
      expect(Math.abs(lhs - rhs) / lhs).toBeLessThan(1e-9);
      const res = clarifierBalanceResidual_kgh({ influentFlow_m3h: q, rasFlow_m3h: qr, mlss_gL: x, wasFlow_m3h: qw, effluentTss_gL: xe, rasConc_gL: xr }).value!;
      expect(Math.abs(res) / lhs).toBeLessThan(1e-9);
    }
  });

  it('edge inputs give unavailable figures, never NaN or Infinity', () => {
    expect(requiredRasConcSimple_gL(1000, 0, 3)).toMatchObject({ value: null, quality: 'unavailable' });
    expect(recycleRatio(0, 100)).toMatchObject({ value: null, quality: 'unavailable' });
    expect(requiredRasConc_gL({ influentFlow_m3h: 10, rasFlow_m3h: 5, mlss_gL: 3, wasFlow_m3h: 20 }).value).toBeNull();
    expect(requiredRasConc_gL({ influentFlow_m3h: 10, rasFlow_m3h: 5, mlss_gL: 0.001, effluentTss_gL: 1 }).value).toBeNull();
    expect(requiredRasConcSimple_gL(Number.NaN, 5, 3).value).toBeNull();
    expect(requiredRasConcSimple_gL(0, 500, 3).value).toBe(3); // no influent: underflow at MLSS
    expect(effluentFlow_m3h(5, 6).value).toBeNull();
  });
});
