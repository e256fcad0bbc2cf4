import { describe, expect, it } from 'vitest';
import type { BalanceData } from '../../../shared/contracts/balance.ts';
import { prefillValues, toFormValues } from '../../../src/features/what-if/api/live-prefill.ts';

const fig = (value: number | null) => ({ value, unit: '', quality: value === null ? ('unavailable' as const) : ('good' as const), reasons: [] });

/**
 * A balance of an invented two-train plant, only the figures the calculators read. Hand
 * computed below: flows add over the trains, MLSS is volume-weighted, TSS area-weighted,
 * Q_e = Q − Q_W (the plant's water balance, common practice).
 */
function balance(over: { sc2Underflow?: number | null } = {}): BalanceData {
  return {
    basins: [
      { code: 'ab1', train: 't1', volume_m3: 6000, aeratedFraction: 1, mlss_gL: fig(3.0), mass_kg: fig(18000) },
      { code: 'ab2', train: 't2', volume_m3: 4000, aeratedFraction: 1, mlss_gL: fig(3.5), mass_kg: fig(14000) },
    ],
    clarifiers: [
      { code: 'sc1', train: 't1', area_m2: 1500, sideWaterDepth_m: 4, underflowTss_gL: fig(8.0), effluentTss_gL: fig(0.012) },
      { code: 'sc2', train: 't2', area_m2: 500, sideWaterDepth_m: 5, underflowTss_gL: fig(over.sc2Underflow === undefined ? 9.0 : over.sc2Underflow), effluentTss_gL: fig(0.004) },
    ],
    trains: [
      { code: 't1', influentFlow_m3h: fig(1200), rasFlow_m3h: fig(700), wasFlow_m3h: fig(12) },
      { code: 't2', influentFlow_m3h: fig(800), rasFlow_m3h: fig(500), wasFlow_m3h: fig(8) },
    ],
    settleability: { svi_mLg: fig(140), kind: 'SVI', sampledAt: null },
    storm: { peakFlow_m3h: fig(5000), source: 'setting' },
    inventory: { aerationMass_kg: fig(32000), clarifierMass_kg: fig(7000), totalMass_kg: fig(39000), storedFraction: fig(0.18) },
    srt: { target_d: 12 },
  } as unknown as BalanceData;
}

describe('what-if inputs from the live balance', () => {
  it('adds the flows, weights MLSS by volume and TSS and depth by area, and closes the water balance', () => {
    const p = prefillValues(balance());
    expect(p.storm).toEqual({
      influentFlow_m3h: 2000,
      rasFlow_m3h: 1200,
      mlss_gL: 3.2, // (6000·3.0 + 4000·3.5) / 10 000
      svi_mLg: 140,
      aerationVolume_m3: 10_000,
      clarifierArea_m2: 2000,
      stormFlow_m3h: 5000,
      clarifierMass_kg: 7000,
    });
    expect(p.statePoint).toEqual({ influentFlow_m3h: 2000, rasFlow_m3h: 1200, wasFlow_m3h: 20, mlss_gL: 3.2, clarifierArea_m2: 2000, 'settling.svi_mLg': 140 });
    expect(p.srt.aerationMass_kg).toBe(32000);
    expect(p.srt.clarifierMass_kg).toBe(7000);
    expect(p.srt.wasFlow_m3h).toBe(20);
    expect(p.srt.wasTss_gL).toBeCloseTo(8.25, 12); // (1500·8 + 500·9) / 2000
    expect(p.srt.effluentFlow_m3h).toBe(1980); // 2000 − 20
    expect(p.srt.effluentTss_gL).toBeCloseTo(0.01, 12); // (1500·0.012 + 500·0.004) / 2000
    expect(p.srt.targetSrt_d).toBe(12);
    // Layered settler: feed Q + Q_R, underflow Q_R + Q_W, depth (1500·4 + 500·5) / 2000.
    expect(p.settler).toEqual({ feedFlow_m3h: 3200, feedTss_gL: 3.2, underflowFlow_m3h: 1220, area_m2: 2000, depth_m: 4.25 });
  });

  it('an unavailable reading leaves its field as it was instead of a partial mean', () => {
    const p = prefillValues(balance({ sc2Underflow: null }));
    expect(p.srt.wasTss_gL).toBeNull();
    const f = toFormValues(p.srt);
    expect(f.missing).toEqual(['wasTss_gL']);
    expect(f.values.wasFlow_m3h).toBe('20');
  });

  it('form text keeps 4 significant digits', () => {
    expect(toFormValues({ a: 3.14159, b: 1234567, c: 0.0123456, d: Number.NaN })).toEqual({ values: { a: '3.142', b: '1235000', c: '0.01235' }, missing: ['d'] });
  });
});
