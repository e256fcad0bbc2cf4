import { describe, expect, it } from 'vitest';
import { settlerRequest, srtRequest, statePointRequest, stormRequest, stormResponse, statePointResponse, settlerResponse, srtResponse, sviRequest, sviResponse } from '../../../shared/contracts/calc.js';
import { calcSettler, calcSrt, calcStatePoint, calcStorm, calcSvi } from '../../../shared/domain/calculators.js';
import { DomainValidationError } from '../../../shared/domain/errors.js';
import { OPERATOR_CAUTION } from '../../../shared/contracts/balance.js';
import { labResultInput } from '../../../shared/contracts/lab.js';

const storm = { influentFlow_m3h: 1000, rasFlow_m3h: 600, mlss_gL: 3, svi_mLg: 120, aerationVolume_m3: 12000, clarifierArea_m2: 1600, stormFlow_m3h: 3000 };
const sp = { influentFlow_m3h: 1000, rasFlow_m3h: 600, mlss_gL: 3, clarifierArea_m2: 1600, settling: { v0_mh: 7.8, k_Lg: 0.4 } };
const settler = { feedFlow_m3h: 36892 / 24, feedTss_gL: 3.26984, underflowFlow_m3h: 18831 / 24, area_m2: 1500, depth_m: 4 };
const srtReq = { aerationMass_kg: 36000, clarifierMass_kg: 6000, wasFlow_m3h: 15, wasTss_gL: 8, effluentFlow_m3h: 1000, effluentTss_gL: 0.01, targetSrt_d: 10 };

function paths(r: { success: boolean; error?: { issues: { path: PropertyKey[]; code: string }[] } }): string[] {
  expect(r.success).toBe(false);
  return r.error!.issues.map((i) => (i.code === 'unrecognized_keys' ? 'unrecognized_keys' : i.path.join('.')));
}

describe('calculator request schemas', () => {
  it('accept valid requests', () => {
    expect(stormRequest.safeParse(storm).success).toBe(true);
    expect(statePointRequest.safeParse(sp).success).toBe(true);
    expect(statePointRequest.safeParse({ ...sp, settling: { svi_mLg: 120, correlation: 'daigger-1995' } }).success).toBe(true);
    expect(settlerRequest.safeParse(settler).success).toBe(true);
    expect(srtRequest.safeParse(srtReq).success).toBe(true);
    expect(sviRequest.safeParse({ settledVolume_mLL: 200, mlss_gL: 3 }).success).toBe(true);
  });

  it('reject negative flows, zero area, SVI 0, strings, missing fields and unknown keys, naming the field', () => {
    expect(paths(stormRequest.safeParse({ ...storm, rasFlow_m3h: -1 }))).toEqual(['rasFlow_m3h']);
    expect(paths(stormRequest.safeParse({ ...storm, clarifierArea_m2: 0 }))).toEqual(['clarifierArea_m2']);
    expect(paths(stormRequest.safeParse({ ...storm, svi_mLg: 0 }))).toEqual(['svi_mLg']);
    expect(paths(stormRequest.safeParse({ ...storm, mlss_gL: '3' }))).toEqual(['mlss_gL']);
    const { stormFlow_m3h: _omit, ...missing } = storm;
    expect(paths(stormRequest.safeParse(missing))).toEqual(['stormFlow_m3h']);
    expect(paths(stormRequest.safeParse({ ...storm, colour: 'blue' }))).toEqual(['unrecognized_keys']);
    expect(paths(stormRequest.safeParse({ ...storm, mlss_gL: 3000 }))).toEqual(['mlss_gL']); // mg/L typed by mistake
    expect(paths(statePointRequest.safeParse({ ...sp, influentFlow_m3h: -5 }))).toEqual(['influentFlow_m3h']);
    expect(paths(statePointRequest.safeParse({ ...sp, settling: { svi_mLg: 120, correlation: 'made-up' } }))).toContain('settling');
    expect(paths(statePointRequest.safeParse({ ...sp, wasFlow_m3h: 2000 }))).toEqual(['wasFlow_m3h']);
    expect(paths(settlerRequest.safeParse({ ...settler, area_m2: 0 }))).toEqual(['area_m2']);
    expect(paths(settlerRequest.safeParse({ ...settler, underflowFlow_m3h: 5000 }))).toEqual(['underflowFlow_m3h']);
    expect(paths(settlerRequest.safeParse({ ...settler, layers: 4, feedLayer: 6 }))).toEqual(['feedLayer']);
    expect(paths(settlerRequest.safeParse({ ...settler, layers: 2.5 }))).toEqual(['layers']);
    expect(paths(srtRequest.safeParse({ ...srtReq, wasFlow_m3h: -1 }))).toEqual(['wasFlow_m3h']);
    expect(paths(srtRequest.safeParse({ ...srtReq, targetSrt_d: 0 }))).toEqual(['targetSrt_d']);
    expect(paths(sviRequest.safeParse({ settledVolume_mLL: 0, mlss_gL: 3 }))).toEqual(['settledVolume_mLL']);
    expect(paths(sviRequest.safeParse({ settledVolume_mLL: 'x', mlss_gL: 3, extra: 1 }))).toEqual(['settledVolume_mLL', 'unrecognized_keys']);
  });

  it('svi schema enforces "dilute and repeat" on settledVolume_mLL, like the domain error', () => {
    const r = sviRequest.safeParse({ settledVolume_mLL: 300, mlss_gL: 3 });
    expect(r.success).toBe(false);
    expect(r.error!.issues[0]!.path).toEqual(['settledVolume_mLL']);
    expect(r.error!.issues[0]!.message).toContain('dilute and repeat');
    expect(() => calcSvi({ settledVolume_mLL: 300, mlss_gL: 3 })).toThrow(DomainValidationError);
  });
});

describe('calculators produce responses that satisfy their schemas, without NaN', () => {
  function noNaN(o: unknown): void {
    JSON.stringify(o, (_k, v) => {
      if (typeof v === 'number') expect(Number.isFinite(v)).toBe(true);
      return v;
    });
  }

  it('storm', () => {
    const r = calcStorm(stormRequest.parse(storm));
    expect(stormResponse.safeParse(r).success).toBe(true);
    expect(r.rasConcRequired_gL).toBeCloseTo(8, 12);
    expect(r.stormRasConcRequired_gL).toBeCloseTo(18, 12);
    expect(r.minRasFlow_m3h).toBeCloseTo((3000 * 3) / 7, 9);
    const zero = calcStorm(stormRequest.parse({ ...storm, influentFlow_m3h: 0, rasFlow_m3h: 0, stormFlow_m3h: 0 }));
    noNaN(zero);
    expect(zero.rasConcRequired_gL).toBeNull();
    expect(zero.quality).toBe('unavailable');
    expect(zero.reasons!.length).toBeGreaterThan(0);
    const weak = calcStorm(stormRequest.parse({ ...storm, svi_mLg: 900 })); // X_R,max = 1.33 < MLSS
    expect(weak.minRecycleRatio).toBeNull();
    noNaN(weak);
  });

  it('state point, given and from a correlation', () => {
    const r = calcStatePoint(statePointRequest.parse(sp));
    expect(statePointResponse.safeParse(r).success).toBe(true);
    expect(r.settling.source).toBe('given');
    const c = calcStatePoint(statePointRequest.parse({ ...sp, settling: { svi_mLg: 120, correlation: 'daigger-roper-1985' } }));
    expect(c.quality).toBe('estimated');
    expect(c.settling.k_Lg).toBeCloseTo(0.148 + 0.0021 * 120, 12);
    const out = calcStatePoint(statePointRequest.parse({ ...sp, settling: { svi_mLg: 300, correlation: 'wahlberg-keinath-1988' } }));
    expect(statePointResponse.safeParse(out).success).toBe(true);
    expect(out.thickeningMargin).toBeNull();
    expect(out.quality).toBe('unavailable');
    for (const e of [out, calcStatePoint(statePointRequest.parse({ ...sp, influentFlow_m3h: 0, rasFlow_m3h: 0 })), calcStatePoint(statePointRequest.parse({ ...sp, rasFlow_m3h: 50000 }))]) noNaN(e);
  });

  it('settler (BSM1 defaults, Alex et al. 2008)', () => {
    const r = calcSettler(settlerRequest.parse(settler));
    expect(settlerResponse.safeParse(r).success).toBe(true);
    expect(r.layers_gL).toHaveLength(10);
    expect(Math.abs(r.underflowTss_gL! - 6.3939844) / 6.3939844).toBeLessThan(0.01);
    // blanket at Xt = 3 g/L between the centres of layers 9 (0.6 m, 0.356 g/L) and 10 (0.2 m, 6.394 g/L)
    expect(r.blanketHeight_m).toBeCloseTo(0.2 + (0.4 * (6.394 - 3)) / (6.394 - 0.35607), 2);
    noNaN(calcSettler(settlerRequest.parse({ ...settler, feedFlow_m3h: 0, underflowFlow_m3h: 0 })));
  });

  it('srt and svi', () => {
    const r = calcSrt(srtRequest.parse(srtReq));
    expect(srtResponse.safeParse(r).success).toBe(true);
    expect(r.wasFlowForTarget_m3h).toBeCloseTo(20.625, 10);
    const none = calcSrt(srtRequest.parse({ ...srtReq, wasFlow_m3h: 0, effluentFlow_m3h: 0 }));
    expect(none.srtTotal_d).toBeNull();
    expect(none.quality).toBe('unavailable');
    noNaN(none);
    const s = calcSvi(sviRequest.parse({ settledVolume_mLL: 200, mlss_gL: 4, dilutionFactor: 2 }));
    expect(sviResponse.safeParse(s).success).toBe(true);
    expect(s).toMatchObject({ svi_mLg: 100, kind: 'DSVI', quality: 'good' });
  });
});

describe('plausibility (issue 16): implausible lab and calculator inputs are refused with the reason', () => {
  it('SVI-family results outside 20–1000 mL/g [CP bounds]: 1 mL/L at 30 g/L … and 250 mL/L × 100 at 0.1 g/L', () => {
    // 0.03 mL/g and 500 000 mL/g came out `good` before; now the MLSS bound catches 30 g/L and the index bound the rest.
    const low = sviRequest.safeParse({ settledVolume_mLL: 1, mlss_gL: 3 }); // 0.33 mL/g
    expect(low.success).toBe(false);
    expect(low.error!.issues[0]!.message).toMatch(/0\.333 mL\/g lies outside the plausible 20–1000 mL\/g/);
    const high = labResultInput.safeParse({ kind: 'DSVI', settledVolume_mLL: 200, dilutionFactor: 100, mlss_gL: 1, sampledAt: '2026-01-01T00:00:00Z' }); // 20 000 mL/g
    expect(high.success).toBe(false);
    expect(high.error!.issues.map((i) => i.path.join('.'))).toContain('settledVolume_mLL');
    expect(labResultInput.safeParse({ kind: 'SVI', settledVolume_mLL: 240, mlss_gL: 3, sampledAt: '2026-01-01T00:00:00Z' }).success).toBe(true); // 80 mL/g
  });
  it('settled volumes over 1000 mL/L and MLSS outside 0.1–20 g/L', () => {
    expect(labResultInput.safeParse({ kind: 'SVI', settledVolume_mLL: 1001, mlss_gL: 3, sampledAt: '2026-01-01T00:00:00Z' }).success).toBe(false);
    for (const mlss_gL of [0.05, 25]) {
      expect(labResultInput.safeParse({ kind: 'MLSS', mlss_gL, sampledAt: '2026-01-01T00:00:00Z' }).success, `lab MLSS ${mlss_gL}`).toBe(false);
      expect(paths(stormRequest.safeParse({ ...storm, mlss_gL })), `storm MLSS ${mlss_gL}`).toEqual(['mlss_gL']);
    }
    expect(labResultInput.safeParse({ kind: 'MLSS', mlss_gL: 0.1, sampledAt: '2026-01-01T00:00:00Z' }).success).toBe(true);
  });
  it('every calculator answer carries the operator caution of the balance', () => {
    expect(calcStorm(stormRequest.parse(storm)).caution).toBe(OPERATOR_CAUTION);
    expect(calcStatePoint(statePointRequest.parse(sp)).caution).toBe(OPERATOR_CAUTION);
    expect(calcSvi(sviRequest.parse({ settledVolume_mLL: 200, mlss_gL: 3 })).caution).toBe(OPERATOR_CAUTION);
  });
});
