import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { dynamicSrtResponse, stormTimelineResponse, stormResponse, statePointResponse, settlerResponse, srtResponse, sviResponse } from '../../shared/contracts/calc.ts';
import { OPERATOR_CAUTION } from '../../shared/contracts/balance.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';

const storm = { influentFlow_m3h: 1500, rasFlow_m3h: 900, mlss_gL: 3.2, svi_mLg: 120, aerationVolume_m3: 12000, clarifierArea_m2: 1400, stormFlow_m3h: 3000 };

function noNaN(body: unknown): void {
  expect(JSON.stringify(body)).not.toMatch(/NaN|Infinity/);
}

describe('calculator API', () => {
  let h: TestApp;
  let token: string;
  beforeAll(async () => {
    h = await createTestApp();
    const a = await h.agent('analyst');
    token = (await a.post('/api/v1/tokens').send({ name: 'calc', role: 'analyst', expiresInDays: 1 })).body.token;
  });
  afterAll(async () => h.close());
  const post = (path: string, body: unknown) => request(h.app).post(`/api/v1/calc/${path}`).set('Authorization', `Bearer ${token}`).send(body as object);

  it('storm: hand-checked against DESIGN §3 items 1–4 (rule of thumb 1200/SVI, common practice)', async () => {
    const r = await post('storm', storm);
    expect(r.status).toBe(200);
    expect(stormResponse.parse(r.body)).toBeTruthy();
    // X_R = X(Q+QR)/QR = 3.2·2400/900 = 8.533 g/L; X_R,max = 1200/120 = 10 g/L.
    expect(r.body.rasConcRequired_gL).toBeCloseTo((3.2 * 2400) / 900, 6);
    expect(r.body.rasConcMax_gL).toBeCloseTo(10, 9);
    // Storm: X' = X_R,max·QR/(Q_storm+QR) = 10·900/3900 = 2.3077 g/L; moved (3.2 − X')·V.
    expect(r.body.equilibriumMlss_gL).toBeCloseTo(9000 / 3900, 6);
    expect(r.body.sludgeToClarifiers_kg).toBeCloseTo((3.2 - 9000 / 3900) * 12000, 3);
    expect(r.body.blanketVolume_m3).toBeCloseTo(r.body.sludgeToClarifiers_kg * 0.12, 3);
    expect(r.body.blanketRise_m).toBeCloseTo(r.body.blanketVolume_m3 / 1400, 6);
    expect(r.body.checks.map((c: { rule: string }) => c.rule).length).toBeGreaterThanOrEqual(3);
    noNaN(r.body);
  });

  it('state point, settler, SRT, SVI answer with their response schemas', async () => {
    const sp = await post('state-point', { influentFlow_m3h: 1500, rasFlow_m3h: 900, mlss_gL: 3.2, clarifierArea_m2: 1400, settling: { svi_mLg: 120, correlation: 'haertel-poepel-1992' } });
    expect(sp.status).toBe(200);
    statePointResponse.parse(sp.body);
    expect(sp.body.overflowRate_mh).toBeCloseTo(1500 / 1400, 9);
    const st = await post('settler', { feedFlow_m3h: 36892 / 24, feedTss_gL: 3.26984, underflowFlow_m3h: 18831 / 24, area_m2: 1500, depth_m: 4 });
    expect(st.status).toBe(200);
    settlerResponse.parse(st.body);
    // BSM1 open-loop steady state, layer 1 = 12.4969 g/m³ (Alex et al. 2008, BSM1 technical report).
    expect(st.body.effluentTss_gL).toBeCloseTo(0.0124969, 4);
    const srt = await post('srt', { aerationMass_kg: 38400, clarifierMass_kg: 6000, wasFlow_m3h: 20, wasTss_gL: 8, effluentFlow_m3h: 1480, effluentTss_gL: 0.01, targetSrt_d: 12 });
    expect(srt.status).toBe(200);
    srtResponse.parse(srt.body);
    // (38400+6000) kg / (20·8 + 1480·0.01) kg/h = 44400/174.8 h = 10.58 d
    expect(srt.body.srtTotal_d).toBeCloseTo(44400 / 174.8 / 24, 6);
    const svi = await post('svi', { settledVolume_mLL: 240, mlss_gL: 3 });
    expect(svi.status).toBe(200);
    sviResponse.parse(svi.body);
    expect(svi.body).toMatchObject({ svi_mLg: 80, kind: 'SVI' });
  });

  it('invalid inputs → 422 with the field named, never 500 or NaN', async () => {
    const cases: Array<[string, unknown, string]> = [
      ['storm', { ...storm, influentFlow_m3h: -1 }, 'influentFlow_m3h'],
      ['storm', { ...storm, clarifierArea_m2: 0 }, 'clarifierArea_m2'],
      ['storm', { ...storm, svi_mLg: 0 }, 'svi_mLg'],
      ['storm', { ...storm, mlss_gL: '3.2' }, 'mlss_gL'],
      ['storm', { ...storm, stormFlow_m3h: undefined }, 'stormFlow_m3h'],
      ['storm', { ...storm, mlss_gL: 3200 }, 'mlss_gL'],
      ['state-point', { influentFlow_m3h: 1500, rasFlow_m3h: 900, mlss_gL: 3.2, clarifierArea_m2: 1400, settling: { v0_mh: -2, k_Lg: 0.4 } }, 'settling.v0_mh'],
      ['svi', { settledVolume_mLL: 400, mlss_gL: 3 }, 'settledVolume_mLL'],
      ['srt', { aerationMass_kg: 'lots' }, 'aerationMass_kg'],
      // plausibility (issue 16): SVI 1/30 mL/g, MLSS outside 0.1–20 g/L
      ['svi', { settledVolume_mLL: 1, mlss_gL: 20 }, 'settledVolume_mLL'],
      ['svi', { settledVolume_mLL: 100, mlss_gL: 25 }, 'mlss_gL'],
      ['storm', { ...storm, mlss_gL: 0.05 }, 'mlss_gL'],
    ];
    for (const [path, body, field] of cases) {
      const r = await post(path, body);
      expect(r.status, `${path} ${field}`).toBe(422);
      expect(Object.keys(r.body.error.fields), `${path} ${field}`).toContain(field);
      noNaN(r.body);
    }
    const dilute = await post('svi', { settledVolume_mLL: 400, mlss_gL: 3 });
    expect(dilute.body.error.fields.settledVolume_mLL.join(' ')).toMatch(/dilute and repeat/);
  });

  it('dynamic SRT of a series: the issue 16 example (42 000 → 46 200 kg over 48 h at 130 kg/h removal) gives 12.41 d', async () => {
    // Age balance d(M·θ)/dt = M − W·θ from θ0 = M/W = 42 000/130 h = 13.46 d; an RK4 of dθ/dt = 1 − θ·(W + dM/dt)/M gives 12.406 d (tests/unit/domain/srt.test.ts).
    const r = await post('dynamic-srt', { points: [{ t_h: 0, inventory_kg: 42000, wasted_kgh: 130 }, { t_h: 48, inventory_kg: 46200, wasted_kgh: 130 }], initialSrt_d: 42000 / 130 / 24 });
    expect(r.status).toBe(200);
    dynamicSrtResponse.parse(r.body);
    expect(r.body.srt_d).toHaveLength(2);
    expect(r.body.srt_d[0]).toBeCloseTo(13.4615, 4);
    expect(r.body.srt_d[1]).toBeCloseTo(12.406, 3);
    expect(r.body.caution).toBe(OPERATOR_CAUTION);
    const back = await post('dynamic-srt', { points: [{ t_h: 0, inventory_kg: 1, wasted_kgh: 1 }, { t_h: 0, inventory_kg: 1, wasted_kgh: 1 }], initialSrt_d: 1 });
    expect(back.status).toBe(422);
    expect(Object.keys(back.body.error.fields)).toContain('points.1.t_h');
  });

  it('storm timeline: a 48 h storm ends within 1 % of the equilibrium, a 2 h one moves less than half (τ = V/(Q_s+Q_R) = 3.08 h), a deep blanket fails', async () => {
    const flat = (h: number) => [{ t_h: 0, flow_m3h: 3000 }, { t_h: h, flow_m3h: 3000 }];
    const long = await post('storm-timeline', { ...storm, hydrograph: flat(48), clarifierDepth_m: 4, blanketNow_m: 0.5 });
    expect(long.status).toBe(200);
    stormTimelineResponse.parse(long.body);
    // Equilibrium X' = 10·900/3900 = 2.3077 g/L (the storm calculator above); moved (3.2 − X')·12 000 = 10 615 kg.
    const moved = (3.2 - 9000 / 3900) * 12000;
    expect(Math.abs(long.body.points.at(-1).mlss_gL - 9000 / 3900) / (9000 / 3900)).toBeLessThan(0.01);
    expect(long.body.equilibriumMlss_gL).toBeCloseTo(9000 / 3900, 9);
    expect(long.body.caution).toBe(OPERATOR_CAUTION);
    const short = await post('storm-timeline', { ...storm, hydrograph: flat(2), clarifierDepth_m: 4, blanketNow_m: 0.5 });
    expect(short.body.points.at(-1).clarifierMass_kg / moved).toBeLessThan(0.5);
    const deep = await post('storm-timeline', { ...storm, hydrograph: flat(12), clarifierDepth_m: 4, blanketNow_m: 3.5 });
    expect(deep.body.blanketReachesSurface_h).not.toBeNull();
    expect(deep.body.quality).not.toBe('good');
    expect(deep.body.checks.find((c: { rule: string }) => c.rule === 'blanket-below-surface').ok).toBe(false);
    noNaN(deep.body);
    const above = await post('storm-timeline', { ...storm, hydrograph: flat(2), clarifierDepth_m: 4, blanketNow_m: 4.5 });
    expect(above.status).toBe(422);
    expect(Object.keys(above.body.error.fields)).toContain('blanketNow_m');
  });

  it('every calculator answer carries the operator caution the balance carries', async () => {
    const bodies: Array<[string, unknown]> = [
      ['storm', storm],
      ['state-point', { influentFlow_m3h: 1500, rasFlow_m3h: 900, mlss_gL: 3.2, clarifierArea_m2: 1400, settling: { v0_mh: 7, k_Lg: 0.4 } }],
      ['settler', { feedFlow_m3h: 1500, feedTss_gL: 3, underflowFlow_m3h: 700, area_m2: 1500, depth_m: 4 }],
      ['srt', { aerationMass_kg: 38400, clarifierMass_kg: 6000, wasFlow_m3h: 20, wasTss_gL: 8, effluentFlow_m3h: 1480, effluentTss_gL: 0.01 }],
      ['svi', { settledVolume_mLL: 240, mlss_gL: 3 }],
    ];
    for (const [path, body] of bodies) {
      const r = await post(path, body);
      expect(r.status, path).toBe(200);
      expect(r.body.caution, path).toBe(OPERATOR_CAUTION);
    }
  });

  it('needs credentials', async () => {
    expect((await request(h.app).post('/api/v1/calc/storm').send(storm)).status).toBe(401);
  });
});
