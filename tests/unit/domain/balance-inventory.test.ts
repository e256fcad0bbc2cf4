import { describe, expect, it } from 'vitest';
import { effluentFlow_m3h, effluentFlowSeries, trainInfluentFlow } from '../../../shared/domain/balance/flows.js';
import { basinMass_kg, blanketMassSeries, blanketRate_m_h, clarifierBlanket, clarifierIntegral, inventoryTotals, trainMlss_gL } from '../../../shared/domain/balance/inventory.js';
import { estimated, good, unavailable } from '../../../shared/domain/quality.js';

// Inventory (design §3 item 7) on the fixture plant's numbers (tests/unit/domain/balance-fixture.ts):
// basin 6000 m³ at 3.0 g/L, clarifier 1500 m² with 4 m side-water depth (BSM1 settler geometry,
// Alex et al. 2008), underflow 8.0 g/L, blanket 1.0 m.
const M = 60_000;
const sc1 = { id: 20, code: 'sc1', area_m2: 1500, sideWaterDepth_m: 4, count: 1 };
const steady = (v: number, minutes: number) => new Map(Array.from({ length: minutes + 1 }, (_, m) => [m * M, v] as [number, number]));

describe('basin and train inventory', () => {
  it('basin mass X·V = 3.0 g/L × 6000 m³ = 18 000 kg; train MLSS (18 000 + 2.0 × 3000)/9000 = 2.6667 g/L', () => {
    expect(basinMass_kg(good(3), 6000)).toEqual({ value: 18_000, quality: 'good', reasons: [] });
    expect(trainMlss_gL([good(18_000), good(6000)], 9000, 't1').value).toBeCloseTo(24_000 / 9000, 12);
    expect(trainMlss_gL([good(18_000), unavailable('AIT-112: bad quality')], 9000, 't1')).toMatchObject({ value: null, reasons: ['AIT-112: bad quality'] });
  });
  it('plant totals: 18 000 + 12 000 = 30 000 kg, stored fraction 12 000/30 000 = 0.4; a zero inventory has no fraction', () => {
    const t = inventoryTotals([good(18_000)], [good(12_000)]);
    expect(t.totalMass_kg.value).toBe(30_000);
    expect(t.storedFraction.value).toBeCloseTo(0.4, 15);
    expect(inventoryTotals([good(0)], [good(0)]).storedFraction.reasons).toEqual(['inventory is zero']);
  });
});

describe('clarifier blanket with clarifier-inventory.ts (depth check included)', () => {
  it("'ras': 1.0 m × 1500 m² × 8.0 g/L = 12 000 kg; 'mean': (3 + 8)/2 = 5.5 g/L → 8250 kg; two 800 m² units: 1.0 × 1600 × 8 = 12 800 kg", () => {
    const ras = clarifierBlanket({ method: 'ras', mlss: good(3), rasConc: good(8), level: good(1), clarifier: sc1 });
    expect(ras.conc_gL.value).toBe(8);
    expect(ras.mass_kg.value).toBeCloseTo(12_000, 9);
    expect(clarifierBlanket({ method: 'mean', mlss: good(3), rasConc: good(8), level: good(1), clarifier: sc1 }).mass_kg.value).toBeCloseTo(8250, 9);
    expect(clarifierBlanket({ method: 'ras', mlss: good(3), rasConc: good(8), level: good(1), clarifier: { ...sc1, area_m2: 800, count: 2 } }).mass_kg.value).toBeCloseTo(12_800, 9);
  });
  it('a level above the 4 m side-water depth is a detector fault, not sludge', () => {
    const m = clarifierBlanket({ method: 'ras', mlss: good(3), rasConc: good(8), level: good(4.5), clarifier: sc1 }).mass_kg;
    expect(m.value).toBeNull();
    expect(m.reasons[0]).toMatch(/above the side-water depth 4 m/);
  });
  it('per minute the same rule leaves such minutes out: levels 1.0, 4.5, 1.2 m → 12 000, –, 14 400 kg', () => {
    const level = new Map([[0, 1.0], [M, 4.5], [2 * M, 1.2]]);
    const out = blanketMassSeries({ method: 'ras', clarifier: sc1, level, rasConc: steady(8, 2), mlss: steady(3, 2) });
    expect([...out.keys()]).toEqual([0, 2 * M]);
    expect(out.get(2 * M)).toBeCloseTo(14_400, 9);
  });
  it('blanket rate: 1.0, 1.1, 1.2 m at 0, 30, 60 min rise 0.2 m/h (least squares); estimated when the points span < half the window', () => {
    const lv = new Map([[0, 1.0], [30 * M, 1.1], [60 * M, 1.2]]);
    expect(blanketRate_m_h(lv, 60, 'sc1')).toMatchObject({ quality: 'good' });
    expect(blanketRate_m_h(lv, 60, 'sc1').value).toBeCloseTo(0.2, 12);
    expect(blanketRate_m_h(lv, 240, 'sc1')).toMatchObject({ quality: 'estimated', reasons: ['sc1: blanket-level data cover only 25 % of the rate window'] });
    expect(blanketRate_m_h(new Map([[0, 1]]), 30, 'sc1').value).toBeNull();
  });
});

describe('clarifier balance integral beside the blanket mass', () => {
  // dM/dt = (Q + Q_R)·X − (Q_R + Q_W)·X_R − Q_e·X_e = 1400·3 − 620·8 − 780·0.01 = 4200 − 4960 − 7.8 = −767.8 kg/h;
  // over 60 min from the blanket mass at the start (12 000 kg): 11 232.2 kg, discrepancy −767.8 kg against 12 000 kg now.
  const series = {
    influentFlow_m3h: steady(800, 60), rasFlow_m3h: steady(600, 60), wasFlow_m3h: steady(20, 60), mlss_gL: steady(3, 60),
    rasConc_gL: steady(8, 60), effluentTss_gL: steady(0.01, 60), blanketLevel_m: steady(1, 60),
  };
  it('steady fixture', () => {
    const r = clarifierIntegral(series, { method: 'ras', clarifier: sc1, massNow_kg: good(12_000) });
    expect(r.integratedMass_kg.value).toBeCloseTo(11_232.2, 6);
    expect(r.discrepancy_kg.value).toBeCloseTo(-767.8, 6);
  });
  it('effluent TSS missing: X_e taken as 0 (−760 kg/h → 11 240 kg), estimated and said so; no level at the start: unavailable', () => {
    const r = clarifierIntegral({ ...series, effluentTss_gL: new Map() }, { method: 'ras', clarifier: sc1, massNow_kg: good(12_000) });
    expect(r.integratedMass_kg).toMatchObject({ quality: 'estimated' });
    expect(r.integratedMass_kg.value).toBeCloseTo(11_240, 6);
    expect(r.integratedMass_kg.reasons).toContain('sc1: effluent TSS missing in some minutes, taken as 0');
    const noLevel = clarifierIntegral({ ...series, blanketLevel_m: new Map() }, { method: 'ras', clarifier: sc1, massNow_kg: good(12_000) });
    expect(noLevel.integratedMass_kg.reasons).toContain('sc1: no blanket level at the start of the integral window');
  });
});

describe('train flows', () => {
  it('train influent: the basin meters; without them the plant meter split by volume, 1200 × 6000/9000 = 800 m³/h, estimated', () => {
    expect(trainInfluentFlow([good(800)], good(1200), 6000 / 9000, 't1')).toEqual({ value: 800, quality: 'good', reasons: [] });
    const split = trainInfluentFlow([unavailable('FIT-111: bad quality')], good(1200), 6000 / 9000, 't1');
    expect(split).toMatchObject({ quality: 'estimated', reasons: ['t1: basin influent not measured; plant influent split by basin volume'] });
    expect(split.value).toBeCloseTo(800, 9);
    expect(trainInfluentFlow([unavailable('x')], unavailable('no plant meter'), 0.5, 't1').value).toBeNull();
  });
  it('effluent Q_e = Q − Q_W = 800 − 20 = 780 m³/h; never negative', () => {
    expect(effluentFlow_m3h(good(800), estimated(20, 'FIT-321 stale'))).toEqual({ value: 780, quality: 'estimated', reasons: ['FIT-321 stale'] });
    expect(effluentFlow_m3h(good(10), good(20)).value).toBe(0);
    expect([...effluentFlowSeries(new Map([[0, 800], [M, 810]]), new Map([[0, 20]]))]).toEqual([[0, 780]]);
  });
});
