import { describe, expect, it } from 'vitest';
import { balanceOut } from '../../../shared/contracts/balance.ts';
import { computeBalance } from '../../../shared/domain/balance/assemble.ts';
import { calcStatePoint } from '../../../shared/domain/calculators.ts';
import { signalUnitFactor } from '../../../shared/domain/balance/signals.ts';
import { fixtureInputs, NOW, settings } from './balance-fixture.ts';

/**
 * Hand computations for the fixture plant (tests/unit/domain/balance-fixture.ts), each from the
 * design §3 formula named beside it:
 *   basin mass     X·V = 3.0 g/L × 6000 m³                         = 18 000 kg      (item 7/inventory)
 *   blanket mass   level × area × X_R = 1.0 × 1500 × 8.0            = 12 000 kg      (item 7, 'ras' method)
 *   stored frac.   12 000 / 30 000                                  = 0.4
 *   X_R,max        1200 / SVI = 1200 / 120                          = 10 g/L         (item 2, [CP])
 *   X_R required   X·(Q+Q_R)/Q_R = 3 × 1400 / 600                   = 7.0 g/L        (item 1)
 *   conc. margin   1 − 7/10                                         = 0.3            (item 3)
 *   R_min          X/(X_R,max − X) = 3/7                            = 0.428571…
 *   Q_R,min        800 × 3/7                                        = 342.857… m³/h
 *   pump margin    1 − 342.857/850                                  = 0.596639…
 *   solids loss    Q_W·X_W + Q_e·X_e = 20×8 + 780×0.010             = 167.8 kg/h     (item 5)
 *   SRT total      30 000 / 167.8 / 24                              = 7.44934 d
 *   SRT aeration   18 000 / 167.8 / 24                              = 4.46961 d
 *   WAS advice     (30 000/(10×24) − 7.8)/8                         = 14.65 m³/h
 *   storm X'       X_R,max·Q_R/(Q_s+Q_R) = 10×600/2200              = 2.72727 g/L    (item 4)
 *   moved          (3 − 2.72727)×6000                               = 1636.36 kg
 *   blanket rise   1636.36 kg × 0.120 m³/kg / 1500 m²               = 0.130909 m
 *   stored after   (12 000 + 1636.36)/30 000                        = 0.454545 (fails the 0.30 rule)
 *   clarifier balance residual (Q+Q_R)X − (Q_R+Q_W)X_R − Q_e·X_e
 *                  = 4200 − 4960 − 7.8 = −767.8 kg/h; over the 1 h integral window
 *                  12 000 − 767.8                                   = 11 232.2 kg, discrepancy −767.8 kg
 */
describe('computeBalance: fixture signals against a hand computation', () => {
  const b = computeBalance(fixtureInputs(), settings());
  const d = b.data;
  const t = d.trains[0]!;

  it('matches the contract', () => {
    expect(balanceOut.safeParse(b).success).toBe(true);
  });
  it('inventory', () => {
    expect(d.basins[0]!.mass_kg).toMatchObject({ value: 18_000, quality: 'good', unit: 'kg' });
    expect(d.clarifiers[0]!.blanketMass_kg.value).toBeCloseTo(12_000, 6);
    expect(d.inventory.totalMass_kg.value).toBeCloseTo(30_000, 6);
    expect(d.inventory.storedFraction.value).toBeCloseTo(0.4, 9);
    expect(d.clarifiers[0]!.effluentTss_gL.value).toBeCloseTo(0.01, 12);
  });
  it('RAS margins on the lower X_R,max: flux theory 9.9077 g/L below the rule 1200/120 = 10 g/L', () => {
    // Flux theory (Keinath et al. 1977): Härtel & Pöpel (1992) at SVI 120 → v0 = 8.41480 m/h, k = 0.553289 L/g;
    // u = (Q_R + Q_W)/A = 620/1500 m/h; G_L/u = 9.907676 g/L (the what-if calculator gives the same, see below).
    const xr = 9.907675696771152;
    expect(t.ras.rasConcMaxRule_gL.value).toBeCloseTo(10, 9);
    expect(t.ras.rasConcMaxFlux_gL.value).toBeCloseTo(xr, 9);
    expect(t.rasConcMaxBasis).toBe('flux');
    expect(t.ras.rasConcMax_gL.value).toBeCloseTo(xr, 9);
    expect(t.ras.requiredRasConc_gL.value).toBeCloseTo(7, 9);
    expect(t.ras.concentrationMargin).toMatchObject({ quality: 'good' });
    expect(t.ras.concentrationMargin.value).toBeCloseTo(1 - 7 / xr, 9);
    // the reason travels with the margin the alarm reads
    expect(t.ras.concentrationMargin.reasons.join(' ')).toMatch(/flux theory 9\.91 g\/L .* below the rule's 10\.00 g\/L .* the lower one limits the RAS margin/);
    expect(t.ras.minRecycleRatio.value).toBeCloseTo(3 / (xr - 3), 9);
    expect(t.ras.minRasFlow_m3h.value).toBeCloseTo((800 * 3) / (xr - 3), 6);
    expect(t.ras.pumpMargin.value).toBeCloseTo(1 - (800 * 3) / (xr - 3) / 850, 6);
  });
  it('SRT and WAS advice', () => {
    expect(d.srt.total_d.quality).toBe('good');
    expect(d.srt.total_d.value).toBeCloseTo(7.44934, 4);
    expect(d.srt.aeration_d.value).toBeCloseTo(4.46961, 4);
    expect(d.srt.dynamic_d.value).toBeCloseTo(7.44934, 3);
    expect(d.srt.wasAdvice_m3h.value).toBeCloseTo(14.65, 6);
    expect(d.srt.wasFlow_m3h.value).toBe(20);
  });
  it('storm projection at the plant peak flow', () => {
    expect(d.storm).toMatchObject({ source: 'plant', peakFlow_m3h: { value: 1600, quality: 'good' } });
    expect(t.storm.equilibriumMlss_gL.value).toBeCloseTo(2.727272727, 6);
    expect(t.storm.sludgeToClarifiers_kg.value).toBeCloseTo(1636.3636, 3);
    expect(t.storm.blanketRise_m.value).toBeCloseTo(0.130909, 5);
    expect(t.storm.storedFraction.value).toBeCloseTo(0.454545, 5);
    expect(t.storm.checks.map((c) => [c.rule, c.ok])).toEqual([
      ['min-mlss', true],
      ['max-stored-fraction', false],
      ['max-blanket-rise', true],
    ]);
  });
  it('clarifier balance integral beside the blanket mass', () => {
    expect(d.clarifiers[0]!.integratedMass_kg.value).toBeCloseTo(11_232.2, 3);
    expect(d.clarifiers[0]!.integralDiscrepancy_kg.value).toBeCloseTo(-767.8, 3);
    expect(d.clarifiers[0]!.blanketRate_m_h.value).toBeCloseTo(0, 9);
  });
  it('every figure carries unit and quality; inputs carry age', () => {
    expect(b.quality).toBe('good');
    expect(b.inputs.signals).toHaveLength(7);
    for (const i of b.inputs.signals) expect(i).toMatchObject({ quality: 'good', stale: false, bad: false, age_s: 1 });
    expect(d.caution).toMatch(/licensed operator decides/);
  });
});

describe('computeBalance: missing, stale and bad inputs', () => {
  it('a stale MLSS (received 100 s ago, period 10 s) is used but estimated, with the reason', () => {
    const b = computeBalance(fixtureInputs({ override: { x: { receivedAt_ms: NOW - 100_000, ts_ms: NOW - 100_000 } } }), settings());
    const input = b.inputs.signals.find((i) => i.tag === 'AIT-111')!;
    expect(input).toMatchObject({ stale: true, quality: 'estimated', value: 3 });
    expect(b.data.basins[0]!.mass_kg).toMatchObject({ value: 18_000, quality: 'estimated' });
    expect(b.data.basins[0]!.mass_kg.reasons.join()).toMatch(/AIT-111: stale: last value received 100 s ago \(> 3 × 10 s/);
    expect(b.data.trains[0]!.ras.concentrationMargin.quality).toBe('estimated');
    expect(b.quality).toBe('estimated');
  });
  it('staleness by receive time even when the sample time is recent (simulated clock ahead)', () => {
    const b = computeBalance(fixtureInputs({ override: { x: { receivedAt_ms: NOW - 100_000 } } }), settings());
    expect(b.inputs.signals.find((i) => i.tag === 'AIT-111')).toMatchObject({ stale: true, lag_s: 0, age_s: 100 });
  });
  it('lag behind the plant clock alone is reported, not stale (a sped-up simulator polled once a wall second lags)', () => {
    const b = computeBalance(fixtureInputs({ override: { x: { ts_ms: NOW - 200_000 } } }), settings());
    expect(b.inputs.signals.find((i) => i.tag === 'AIT-111')).toMatchObject({ stale: false, quality: 'good', lag_s: 199, age_s: 1 });
  });
  it('an MLSS older than inputs.max_age_s is unavailable, and so is everything built on it — no zero', () => {
    const b = computeBalance(fixtureInputs({ override: { x: { receivedAt_ms: NOW - 1_000_000, ts_ms: NOW - 1_000_000 } } }), settings());
    expect(b.data.basins[0]!.mlss_gL).toMatchObject({ value: null, quality: 'unavailable' });
    expect(b.data.inventory.totalMass_kg).toMatchObject({ value: null, quality: 'unavailable' });
    expect(b.data.trains[0]!.ras.concentrationMargin.value).toBeNull();
    expect(b.data.trains[0]!.ras.concentrationMargin.reasons.join()).toMatch(/AIT-111: stale.*beyond the 900 s/);
    expect(b.quality).toBe('unavailable');
  });
  it('a bad sample or an unmapped signal is unavailable with the reason', () => {
    const bad = computeBalance(fixtureInputs({ override: { xr: { qualityCode: 2 | 8 } } }), settings());
    expect(bad.data.clarifiers[0]!.blanketMass_kg).toMatchObject({ value: null, quality: 'unavailable' });
    expect(bad.data.clarifiers[0]!.blanketMass_kg.reasons.join()).toMatch(/AIT-221: bad quality \(outOfRange\)/);
    expect(bad.inputs.signals.find((i) => i.tag === 'AIT-221')).toMatchObject({ bad: true });
    const missing = computeBalance(fixtureInputs({ override: { qr: null } }), settings());
    expect(missing.data.trains[0]!.rasFlow_m3h.reasons.join()).toMatch(/no tag mapped for pump.flow of ras1/);
    expect(missing.data.trains[0]!.ras.pumpMargin.value).toBeNull();
  });
  it('an uncertain sample makes its figures estimated', () => {
    const b = computeBalance(fixtureInputs({ override: { q: { qualityCode: 1 | 16 } } }), settings());
    expect(b.data.trains[0]!.influentFlow_m3h).toMatchObject({ value: 800, quality: 'estimated' });
    expect(b.data.trains[0]!.ras.requiredRasConc_gL.reasons.join()).toMatch(/FIT-111: uncertain quality \(flatLine\)/);
  });
  it('no SVI: RAS concentration limit, margins and storm unavailable with the reason; inventory still good', () => {
    const b = computeBalance(fixtureInputs({ svi: null }), settings());
    const t = b.data.trains[0]!;
    for (const f of [t.ras.rasConcMax_gL, t.ras.concentrationMargin, t.ras.pumpMargin, t.storm.equilibriumMlss_gL]) {
      expect(f.value).toBeNull();
      expect(f.reasons.join()).toMatch(/no SVI or DSVI/);
    }
    expect(b.data.inventory.totalMass_kg.quality).toBe('good');
  });
  it('no peak flow on the plant: 2 × the 24 h mean influent, estimated, and said so', () => {
    const b = computeBalance(fixtureInputs({ peakFlow_m3h: null }), settings());
    expect(b.data.storm.source).toBe('setting');
    expect(b.data.storm.peakFlow_m3h).toMatchObject({ value: 1600, quality: 'estimated' });
    expect(b.data.storm.peakFlow_m3h.reasons[0]).toMatch(/storm flow taken as 2 × the 24 h mean influent 800 m3\/h/);
    expect(b.data.trains[0]!.storm.equilibriumMlss_gL.quality).toBe('estimated');
  });
  it('no effluent TSS: SRT estimated with effluent solids taken as 0 (overstated), said so', () => {
    const b = computeBalance(fixtureInputs({ override: { xe: null } }), settings());
    // 30 000 / (20 × 8) / 24 = 7.8125 d
    expect(b.data.srt.total_d.value).toBeCloseTo(7.8125, 4);
    expect(b.data.srt.total_d.quality).toBe('estimated');
    expect(b.data.srt.total_d.reasons.join()).toMatch(/effluent solids taken as 0/);
  });
  it('a short history makes the rolling SRT estimated or unavailable by coverage', () => {
    expect(computeBalance(fixtureInputs({ hours: 18 }), settings()).data.srt.total_d.quality).toBe('estimated');
    const short = computeBalance(fixtureInputs({ hours: 6 }), settings()).data.srt.total_d;
    expect(short.value).toBeNull();
    expect(short.reasons.join()).toMatch(/cover only 25 %/);
  });
  it('blanket levels above the 4 m side-water depth are left out of the SRT inventory, not counted as sludge', () => {
    // Detector stuck at 4.5 m for the whole window (latest value 1.0 m): no usable clarifier minute,
    // so the total SRT counts aeration mass only: 18 000/167.8/24 = 4.46961 d. Counting the fault as
    // sludge (4.5 × 1500 × 8 = 54 000 kg) would have given (18 000 + 54 000)/167.8/24 = 17.878 d.
    const inp = fixtureInputs();
    inp.series.set(3, inp.series.get(3)!.map((p) => ({ ...p, mean: 4.5 })));
    const b = computeBalance(inp, settings());
    expect(b.data.srt.total_d.value).toBeCloseTo(18_000 / 167.8 / 24, 6);
    expect(b.data.srt.total_d.reasons).toContain('clarifier mass series too sparse: total SRT counts aeration mass only');
    expect(b.data.clarifiers[0]!.blanketMass_kg.value).toBeCloseTo(12_000, 6);
  });
  it('units: known equivalents convert, a unit of the wrong dimension is refused', () => {
    expect(signalUnitFactor('clarifier.effluentTss', 'mg/L')).toBe(1e-3);
    expect(signalUnitFactor('pump.flow', 'L/s')).toBeCloseTo(3.6, 12);
    expect(signalUnitFactor('basin.mlss', 'm')).toBeNull();
    const b = computeBalance(fixtureInputs({ override: { x: { unit: 'm' } } }), settings());
    expect(b.data.basins[0]!.mlss_gL.reasons.join()).toMatch(/unit 'm' does not fit signal basin.mlss/);
  });
});

describe('computeBalance: aerobic SRT from the basins\' aerated fraction', () => {
  it('fixture basin 70 % aerated: aerobic SRT = 0.7 × 18 000/167.8/24 = 3.12873 d (mass basis); unset fraction is said', () => {
    const inp = fixtureInputs();
    inp.layout.trains[0]!.basins[0]!.aeratedFraction = 0.7;
    const d = computeBalance(inp, settings()).data;
    expect(d.basins[0]!.aeratedFraction).toBe(0.7);
    expect(d.srt.aerobicFraction.value).toBeCloseTo(0.7, 12);
    expect(d.srt.aerobic_d.value).toBeCloseTo((0.7 * 18_000) / 167.8 / 24, 6);
    expect(d.srt.aeration_d.value).toBeCloseTo(4.46961, 4);
    const unset = computeBalance(fixtureInputs(), settings()).data.srt;
    expect(unset.aerobic_d.value).toBeCloseTo(4.46961, 4);
    expect(unset.aerobic_d.reasons.join(' ')).toMatch(/aerated fraction not set .* ab1: taken as fully aerated/);
  });
});

describe('computeBalance: live state point per clarifier equals the what-if calculator (Keinath 1985; Keinath et al. 1977)', () => {
  const req = { influentFlow_m3h: 800, rasFlow_m3h: 600, wasFlow_m3h: 20, mlss_gL: 3, clarifierArea_m2: 1500 };
  it('fixture at SVI 120, Härtel & Pöpel (1992): every figure identical to POST /calc/state-point on the same inputs', () => {
    const sp = computeBalance(fixtureInputs(), settings()).data.clarifiers[0]!.statePoint;
    const calc = calcStatePoint({ ...req, settling: { svi_mLg: 120, correlation: 'haertel-poepel-1992' } });
    for (const k of ['overflowRate_mh', 'solidsLoading_kgm2h', 'underflowRate_mh', 'limitingFlux_kgm2h', 'limitingConc_gL', 'maxUnderflowConc_gL', 'requiredUnderflowConc_gL', 'thickeningMargin', 'clarificationMargin'] as const) {
      expect(sp[k].value, k).not.toBeNull();
      expect(sp[k].value, k).toBe(calc[k]);
    }
    expect(sp.settling).toMatchObject({ v0_mh: calc.settling.v0_mh, k_Lg: calc.settling.k_Lg, source: 'correlation', correlation: 'haertel-poepel-1992' });
    // hand check of the plain ones: SOR = (800 − 20)/1500 = 0.52 m/h; SLR = 1400·3/1500 = 2.8 kg/(m²·h)
    expect(sp.overflowRate_mh.value).toBeCloseTo(0.52, 12);
    expect(sp.solidsLoading_kgm2h.value).toBeCloseTo(2.8, 12);
    expect(sp.rasConcMax).toMatchObject({ used: 'flux' });
    expect(sp.rasConcMax.rule_gL.value).toBeCloseTo(10, 9);
    expect(sp.rasConcMax.flux_gL.value).toBe(calc.maxUnderflowConc_gL);
  });
  it('a bulking sludge (SVI 250): the rule 1200/250 = 4.8 g/L is below flux theory (5.857 g/L) and limits the margin', () => {
    const b = computeBalance(fixtureInputs({ svi: 250 }), settings()).data.trains[0]!;
    const calc = calcStatePoint({ ...req, settling: { svi_mLg: 250, correlation: 'haertel-poepel-1992' } });
    expect(b.rasConcMaxBasis).toBe('rule');
    expect(b.ras.rasConcMax_gL.value).toBeCloseTo(4.8, 9);
    expect(b.ras.rasConcMaxFlux_gL.value).toBe(calc.maxUnderflowConc_gL);
    expect(calc.maxUnderflowConc_gL!).toBeGreaterThan(4.8);
    expect(b.ras.concentrationMargin.value).toBeCloseTo(1 - 7 / 4.8, 9);
  });
  it('no SVI: no settling parameters, no X_R,max either way, every state point figure unavailable with the reason', () => {
    const d = computeBalance(fixtureInputs({ svi: null }), settings()).data;
    expect(d.clarifiers[0]!.statePoint.limitingFlux_kgm2h.value).toBeNull();
    expect(d.clarifiers[0]!.statePoint.limitingFlux_kgm2h.reasons.join(' ')).toMatch(/no SVI/);
    expect(d.trains[0]!.rasConcMaxBasis).toBeNull();
  });
});

describe('computeBalance: the design storm in time (setting storm.hydrograph: 6 h at the peak, then 6 h back)', () => {
  // Fixture: Q 800, Q_R 600 m³/h, X 3 g/L, V 6000 m³, A 1500 m², depth 4 m, peak 1600 m³/h, SVI 120.
  // X_R,max = 9.907676 g/L (flux theory, the lower); capped: 2200·3 = 6600 > 9.907676·600 = 5944.6 kg/h.
  // X' = 5944.6/2200 = 2.70209 g/L; τ = 6000/2200 = 2.7273 h; moved after 6 h = (3 − X')·6000·(1 − e^(−6/τ)).
  const xr = 9.907675696771152;
  const xEq = (xr * 600) / 2200;
  const tau = 6000 / 2200;
  it('peak blanket = 1.0 m + moved·SVI·1e-3/A; the stored fraction already fails at t = 0 (0.4 > 0.30 [CP])', () => {
    const tl = computeBalance(fixtureInputs(), settings()).data.trains[0]!.storm.timeline;
    const moved6 = (3 - xEq) * 6000 * (1 - Math.exp(-6 / tau));
    expect(tl.peakBlanket_m.value).toBeCloseTo(1 + (moved6 * 0.12) / 1500, 3);
    expect(tl.quality).toBe('good');
    expect(tl.blanketReachesSurface_h).toBeNull();
    expect(tl.firstFailedRule).toBe('max-stored-fraction');
    expect(tl.firstFailure_h).toBe(0);
    expect(tl.points.at(-1)!.t_h).toBe(12);
  });
  it('a blanket at 3.9 m of 4 m reaches the surface after 0.1 m of rise = 1250 kg: t = −τ·ln(1 − 1250/((3 − X′)·6000)) = 3.26 h; never good', () => {
    const tl = computeBalance(fixtureInputs({ override: { lv: { value: 3.9 } } }), settings()).data.trains[0]!.storm.timeline;
    expect(tl.blanketReachesSurface_h!).toBeCloseTo(-tau * Math.log(1 - 1250 / ((3 - xEq) * 6000)), 1);
    expect(tl.quality).toBe('estimated');
    expect(tl.peakBlanket_m.quality).not.toBe('good');
    expect(tl.checks.find((c) => c.rule === 'blanket-below-surface')).toMatchObject({ ok: false, limit: 4 });
  });
});

describe('computeBalance: the equilibrium storm projection against the clarifier depth', () => {
  it('a rise that lifts the blanket above the surface is never good (issue 16: an 18.75 m rise came out good)', () => {
    // SVI 120 rule projection at 1600 m³/h: rise 0.1309 m (hand computation above); blanket at 3.95 m of 4 m → 4.08 m.
    const st = computeBalance(fixtureInputs({ override: { lv: { value: 3.95 } } }), settings()).data.trains[0]!.storm;
    expect(st.blanketRise_m.quality).toBe('estimated');
    expect(st.blanketRise_m.reasons.join(' ')).toMatch(/above the clarifier surface \(4 m\)/);
    const ok = computeBalance(fixtureInputs(), settings()).data.trains[0]!.storm;
    expect(ok.blanketRise_m.quality).toBe('good');
  });
});
