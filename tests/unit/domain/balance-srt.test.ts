import { describe, expect, it } from 'vitest';
import { plantDynamicSrt, plantMassSeries, plantRollingSrt, solidsLossSeries, wasAdvice, type TrainSrtSeries } from '../../../shared/domain/balance/srt.js';
import { good } from '../../../shared/domain/quality.js';
import { EFFLUENT_TSS_NOT_MEASURED } from '../../../shared/domain/srt.js';

// SRT of the plant from its trains' measured series (design §3 item 5; SRT definition as in
// Metcalf & Eddy 5th ed. 2014, ch. 7; dynamic SRT after Takács et al. 2008, reconstruction [M]).
const M = 60_000;
const END = 24 * 60 * M;
const steady = (v: number) => new Map(Array.from({ length: 24 * 60 + 1 }, (_, m) => [m * M, v] as [number, number]));
// Train A is the fixture train; train B is half its size with 6 g/L underflow and no effluent TSS meter.
const A: TrainSrtSeries = { aerationMass_kg: steady(18_000), clarifierMass_kg: steady(12_000), wasFlow_m3h: steady(20), wasTss_gL: steady(8), effluentFlow_m3h: steady(780), effluentTss_gL: steady(0.01) };
const B: TrainSrtSeries = { aerationMass_kg: steady(9000), clarifierMass_kg: steady(4000), wasFlow_m3h: steady(10), wasTss_gL: steady(6), effluentFlow_m3h: steady(390), effluentTss_gL: null };

describe('plant SRT from the trains', () => {
  it('solids loss per minute: A 20·8 + 780·0.01 = 167.8, B 10·6 + 390·0 = 60 → 227.8 kg/h', () => {
    const loss = solidsLossSeries([A, B]);
    expect(loss.size).toBe(1441);
    expect(loss.get(0)).toBeCloseTo(227.8, 9);
    expect(plantMassSeries([A, B]).total_kg.get(0)).toBe(43_000);
  });
  it('rolling SRT, one train: 30 000/167.8/24 = 7.44934 d total, 18 000/167.8/24 = 4.46961 d aeration', () => {
    const r = plantRollingSrt([A], END, 24);
    expect(r.total_d).toMatchObject({ quality: 'good' });
    expect(r.total_d.value).toBeCloseTo(30_000 / 167.8 / 24, 9);
    expect(r.aeration_d.value).toBeCloseTo(18_000 / 167.8 / 24, 9);
    expect(r.coverage).toBeCloseTo(1, 12);
  });
  it('rolling SRT, two trains, B without effluent TSS: 43 000/227.8/24 = 7.8651 d, estimated (overstated)', () => {
    const r = plantRollingSrt([A, B], END, 24);
    expect(r.total_d.value).toBeCloseTo(43_000 / 227.8 / 24, 9);
    expect(r.aeration_d.value).toBeCloseTo(27_000 / 227.8 / 24, 9);
    expect(r.total_d).toMatchObject({ quality: 'estimated', reasons: [EFFLUENT_TSS_NOT_MEASURED] });
  });
  it('dynamic SRT at steady state stays at M/P = 30 000/167.8/24 d; needs two minutes; says when X_e was taken as 0', () => {
    const d = plantDynamicSrt(plantMassSeries([A]).total_kg, solidsLossSeries([A]), 24, false);
    expect(d.value).toBeCloseTo(30_000 / 167.8 / 24, 9);
    expect(d.reasons[0]).toMatch(/age balance integrated over 24\.0 h .*Takács et al\. 2008/);
    expect(plantDynamicSrt(new Map([[0, 1]]), new Map([[0, 1]]), 24, false).value).toBeNull();
    expect(plantDynamicSrt(plantMassSeries([A, B]).total_kg, solidsLossSeries([A, B]), 24, true).reasons).toContain(EFFLUENT_TSS_NOT_MEASURED);
  });
});

describe('dynamic SRT fed with what the engine measures (issue 16)', () => {
  it('inventory 42 000 → 46 200 kg over 48 h at 130 kg/h removal: 12.41 d, not the 13.55 d of removal-as-production', () => {
    // Minute series; production P = 130 + 4200/48 = 217.5 kg/h is implied by dM/dt. Start age M/W = 42 000/130 h.
    const n = 48 * 60;
    const mass = new Map(Array.from({ length: n + 1 }, (_, i) => [i * M, 42_000 + (4200 * i) / n] as [number, number]));
    const removal = new Map(Array.from({ length: n + 1 }, (_, i) => [i * M, 130] as [number, number]));
    const d = plantDynamicSrt(mass, removal, 48, false);
    // Hand reference (RK4 of dθ/dt = 1 − θ·217.5/M(t), h = 0.001 h): 12.4060 d.
    expect(d.value).toBeCloseTo(12.406, 3);
    expect(d.quality).toBe('estimated');
  });
});

describe('WAS advice from the present totals: Q_W = (M/(SRT·24) − Q_e·X_e)/X_W', () => {
  const a = { influentFlow_m3h: good(800), wasFlow_m3h: good(20), rasConc_gL: good(8), effluentTss_gL: good(0.01) };
  const b = { influentFlow_m3h: good(400), wasFlow_m3h: good(10), rasConc_gL: good(6), effluentTss_gL: good(0.02) };
  it('one train (fixture): (30 000/240 − 780·0.01)/8 = (125 − 7.8)/8 = 14.65 m³/h', () => {
    const r = wasAdvice([a], good(30_000), 10);
    expect(r.wasAdvice_m3h.value).toBeCloseTo(14.65, 9);
    expect(r.wasFlow_m3h.value).toBe(20);
  });
  it('two trains: Q_e 780 + 390 = 1170; X_e (7.8 + 7.8)/1170; X_W (20·8 + 10·6)/30 = 7.333; (43 000/240 − 15.6)/7.333 = 22.3045 m³/h', () => {
    const r = wasAdvice([a, b], good(43_000), 10);
    expect(r.wasAdvice_m3h.value).toBeCloseTo((43_000 / 240 - 15.6) / (220 / 30), 9);
    expect(r.wasFlow_m3h.value).toBe(30);
  });
  it('no WAS running: X_W is the plain mean (8 + 6)/2 = 7; Q_e 1200, Q_e·X_e = 8 + 8 = 16 → (179.1667 − 16)/7 = 23.3095 m³/h', () => {
    const r = wasAdvice([{ ...a, wasFlow_m3h: good(0) }, { ...b, wasFlow_m3h: good(0) }], good(43_000), 10);
    expect(r.wasAdvice_m3h.value).toBeCloseTo((43_000 / 240 - 16) / 7, 9);
  });
});
