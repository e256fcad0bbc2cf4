import { describe, expect, it } from 'vitest';
import { recycleRatio, requiredRasConc_gL } from '../../../shared/domain/clarifier-balance.js';
import { minRecycleRatio } from '../../../shared/domain/ras-margin.js';
import { statePoint } from '../../../shared/domain/state-point.js';
import { toBaseUnit } from '../../../shared/domain/units.js';

// Textbook worked example: Metcalf & Eddy, Wastewater Engineering: Treatment and Resource Recovery,
// 5th ed. (McGraw-Hill, 2014), Example 8-3 (complete-mix activated sludge for BOD removal and
// nitrification), the secondary clarifier sizing step (p. 767 in that edition).
// Given (recalled from memory, as are the example number and page; check the book before quoting them):
//   Q = 22 700 m³/d, MLSS X = 3000 g/m³, return concentration X_R = 8000 g/m³, design hydraulic
//   application rate 24 m³/(m²·d) (the book takes it from its table of typical rates).
// The book's answers: return ratio R = X/(X_R − X) = 0.6; area A = Q/24 = 945.8 m²; solids loading
// (1 + R)·Q·X/A = 4.8 kg/(m²·h). Waste flow and effluent solids are neglected in that step, as here.
const Q_m3d = 22_700;
const Q = toBaseUnit(Q_m3d, 'flow', 'm3/d')!; // 22 700 / 24 = 945.83 m³/h
const X = 3.0; // g/L
const XR = 8.0; // g/L
const area_m2 = Q_m3d / 24; // 945.8 m²

describe('Metcalf & Eddy 5th ed. (2014), Example 8-3, secondary clarifier step', () => {
  it('return ratio from the clarifier solids balance: R = 0.6', () => {
    const r = minRecycleRatio(X, XR);
    expect(r.quality).toBe('good');
    expect(r.value).toBeCloseTo(0.6, 12);
    // and the balance run the other way: with Q_R = 0.6·Q the required X_R is the book's 8000 g/m³
    const qr = 0.6 * Q;
    expect(recycleRatio(Q, qr).value).toBeCloseTo(0.6, 12);
    expect(requiredRasConc_gL({ influentFlow_m3h: Q, rasFlow_m3h: qr, mlss_gL: X }).value).toBeCloseTo(XR, 12);
  });

  it('overflow rate 24 m³/(m²·d) = 1.0 m/h on 945.8 m², solids loading 4.8 kg/(m²·h)', () => {
    expect(area_m2).toBeCloseTo(945.8, 1);
    const sp = statePoint({
      influentFlow_m3h: Q,
      rasFlow_m3h: 0.6 * Q,
      mlss_gL: X,
      clarifierArea_m2: area_m2,
      // settling parameters do not enter overflow rate or solids loading; any valid pair
      vesilind: { v0_mh: 7.8, k_Lg: 0.45 },
    });
    expect(sp.overflowRate_mh.value! * 24).toBeCloseTo(24, 10);
    expect(sp.solidsLoading_kgm2h.value).toBeCloseTo(4.8, 10);
    // the required underflow concentration of the state point is the same X_R
    expect(sp.requiredUnderflowConc_gL.value).toBeCloseTo(XR, 10);
  });
});
