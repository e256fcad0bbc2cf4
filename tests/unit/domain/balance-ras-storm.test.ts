import { describe, expect, it } from 'vitest';
import { rasConcMaxFromSvi_gL, trainRasMargins } from '../../../shared/domain/balance/ras.js';
import { stormPeakFlow, stormShare, trainStorm, trainStormFlow_m3h } from '../../../shared/domain/balance/storm.js';
import { DEFAULT_STORM_CHECKS } from '../../../shared/domain/storm.js';
import { estimated, good, unavailable } from '../../../shared/domain/quality.js';

// Fixture plant numbers (tests/unit/domain/balance-fixture.ts): Q 800, Q_R 600 m³/h, X 3.0 g/L,
// SVI 120 mL/g, RAS pumps 850 m³/h, basin 6000 m³, clarifier 1500 m² holding 12 000 kg.
describe('RAS margins of a train (design §3 items 1–3)', () => {
  it('X_R,max = 1200/SVI = 1200/120 = 10 g/L (rule of thumb [CP]); an estimated SVI makes it estimated', () => {
    expect(rasConcMaxFromSvi_gL(good(120), 1200).value).toBeCloseTo(10, 12);
    expect(rasConcMaxFromSvi_gL(estimated(120, 'SVI 8 d old'), 1200)).toMatchObject({ quality: 'estimated', reasons: ['SVI 8 d old'] });
  });
  it('by hand: X_R,req = 3 × 1400/600 = 7; margin 1 − 7/10 = 0.3; R_min = 3/7; Q_R,min = 800 × 3/7 = 342.857; pump margin 1 − 342.857/850', () => {
    const r = trainRasMargins({ influentFlow_m3h: good(800), rasFlow_m3h: good(600), mlss_gL: good(3), rasConcMax_gL: good(10), rasPumpCapacity_m3h: 850 });
    expect(r.requiredRasConc_gL).toMatchObject({ unit: 'g/L', quality: 'good' });
    expect(r.requiredRasConc_gL.value).toBeCloseTo(7, 9);
    expect(r.concentrationMargin.value).toBeCloseTo(0.3, 9);
    expect(r.minRecycleRatio.value).toBeCloseTo(3 / 7, 9);
    expect(r.minRasFlow_m3h.value).toBeCloseTo(800 * 3 / 7, 6);
    expect(r.pumpMargin.value).toBeCloseTo(1 - (800 * 3) / 7 / 850, 9);
    // zero concentration margin at Q = X_R,max·Q_R/X − Q_R = 10·600/3 − 600 = 1400 m³/h (Q_R held)
    expect(r.concentrationLimitFlow_m3h.value).toBeCloseTo(1400, 6);
    // Q·R_min = capacity at Q = 850 × 7/3 = 1983.33 m³/h
    expect(r.pumpLimitFlow_m3h.value).toBeCloseTo(850 * 7 / 3, 6);
  });
  it('an unavailable input makes every figure unavailable with its reason; an uncertain one makes them estimated', () => {
    const r = trainRasMargins({ influentFlow_m3h: good(800), rasFlow_m3h: unavailable('no tag mapped for pump.flow of ras1'), mlss_gL: good(3), rasConcMax_gL: good(10), rasPumpCapacity_m3h: 850 });
    for (const f of [r.requiredRasConc_gL, r.concentrationMargin, r.pumpMargin]) expect(f).toMatchObject({ value: null, reasons: ['no tag mapped for pump.flow of ras1'] });
    const e = trainRasMargins({ influentFlow_m3h: estimated(800, 'FIT-111 flatLine'), rasFlow_m3h: good(600), mlss_gL: good(3), rasConcMax_gL: good(10), rasPumpCapacity_m3h: 850 });
    expect(e.concentrationMargin).toMatchObject({ quality: 'estimated', reasons: ['FIT-111 flatLine'] });
  });
});

describe('storm projection of a train (design §3 item 4)', () => {
  it('storm flow: the plant peak; else factor × mean influent (2 × 800 = 1600, estimated, said so); else unavailable', () => {
    expect(stormPeakFlow(1600, new Map(), 2, 24)).toEqual({ peak: { value: 1600, quality: 'good', reasons: [] }, source: 'plant' });
    const day = new Map(Array.from({ length: 1441 }, (_, m) => [m * 60_000, m % 2 ? 700 : 900] as [number, number]));
    // 721 minutes at 900 and 720 at 700: mean (721·900 + 720·700)/1441 = 800.139 m³/h
    const d = stormPeakFlow(null, day, 2, 24);
    expect(d.source).toBe('setting');
    expect(d.peak.value).toBeCloseTo((2 * (721 * 900 + 720 * 700)) / 1441, 9);
    expect(d.peak.reasons[0]).toMatch(/storm flow taken as 2 × the 24 h mean influent 800 m3\/h/);
    const six = new Map(Array.from({ length: 361 }, (_, m) => [m * 60_000, 800] as [number, number]));
    expect(stormPeakFlow(null, six, 2, 24).peak.reasons[0]).toMatch(/the 6\.0 h mean influent/); // 361 min = 6.02 h
    expect(stormPeakFlow(null, new Map(), 2, 24)).toMatchObject({ source: 'none', peak: { value: null } });
  });
  it('share: 800 of 800 + 400 = 2/3 by measured influent; by volume 6000/9000 when a train flow is unknown', () => {
    expect(stormShare(good(800), [good(800), good(400)], 6000, 9000)).toBeCloseTo(2 / 3, 15);
    expect(stormShare(good(800), [good(800), unavailable('x')], 6000, 12_000)).toBe(0.5);
    expect(trainStormFlow_m3h(good(1800), 2 / 3).value).toBeCloseTo(1200, 9);
  });
  const base = {
    trainCode: 't1', influentFlow_m3h: good(800), rasFlow_m3h: good(600), mlss_gL: good(3), svi_mLg: good(120), stormFlow_m3h: good(1600),
    clarifierMass_kg: good(12_000), aerationVolume_m3: 6000, clarifierArea_m2: 1500, xrFactor: 1200, checks: DEFAULT_STORM_CHECKS,
  };
  it("by hand: X' = 10·600/(1600 + 600) = 2.7273 g/L; moved (3 − 2.7273)·6000 = 1636.4 kg; rise 1636.4 × 0.120/1500 = 0.1309 m; stored (12 000 + 1636.4)/30 000 = 0.4545", () => {
    const s = trainStorm(base);
    expect(s.equilibriumMlss_gL.value).toBeCloseTo(60 / 22, 9);
    expect(s.sludgeToClarifiers_kg.value).toBeCloseTo((3 - 60 / 22) * 6000, 6);
    expect(s.blanketRise_m.value).toBeCloseTo(((3 - 60 / 22) * 6000 * 0.12) / 1500, 9);
    expect(s.storedFraction.value).toBeCloseTo((12_000 + (3 - 60 / 22) * 6000) / 30_000, 9);
    expect(s.checks.map((c) => [c.rule, c.ok])).toEqual([['min-mlss', true], ['max-stored-fraction', false], ['max-blanket-rise', true]]);
  });
  it('clarifier mass unknown: taken as 0 (stored 1636.4/18 000 = 0.0909), estimated and said so; no SVI: unavailable', () => {
    const s = trainStorm({ ...base, clarifierMass_kg: unavailable('LIT-211: bad quality') });
    expect(s.storedFraction.value).toBeCloseTo(((3 - 60 / 22) * 6000) / 18_000, 9);
    expect(s.storedFraction.quality).toBe('estimated');
    expect(s.storedFraction.reasons).toContain('t1: clarifier mass unknown, taken as 0 (stored fraction understated)');
    const noSvi = trainStorm({ ...base, svi_mLg: unavailable('no SVI') });
    expect(noSvi.equilibriumMlss_gL).toMatchObject({ value: null, reasons: ['no SVI'] });
    expect(noSvi.checks).toEqual([]);
  });
});
