import { describe, expect, it } from 'vitest';
import { Instrument, type Reading } from '../../../simulators/instruments/instrument.js';
import type { DemoTag } from '../../../simulators/plant/demo-plant.js';
import type { FaultSpec } from '../../../simulators/scenarios/scenario.schema.js';

const TAG: DemoTag = {
  name: 'AIT-111', description: 'test MLSS', unit: 'g/L', protocol: 'mqtt', address: 'kb/ab1/AIT-111',
  rangeLow: 0, rangeHigh: 10, expectedPeriod_s: 10,
  signal: { kind: 'basin.mlss', target: 'ab1' }, instrument: { noiseSd: 0, lag_s: 0, resolution: 0.01 },
};
const EPOCH = Date.UTC(2026, 0, 1);
const STEP_H = 5 / 3600;

/** Drives one instrument with a true-value function for `hours`, returning its readings. */
function run(tag: DemoTag, faults: FaultSpec[], value: (t_h: number) => number, hours: number, seed = 1): Reading[] {
  const ins = new Instrument(tag, faults, seed);
  const out: Reading[] = [];
  for (let t = STEP_H; t <= hours + 1e-9; t += STEP_H) {
    ins.track(value(t), STEP_H);
    ins.sample(t, EPOCH, out);
  }
  return out;
}

describe('instrument', () => {
  it('reports at its sample period, quantised to its resolution', () => {
    const r = run(TAG, [], () => 3.14159, 1);
    expect(r.length).toBeGreaterThanOrEqual(359);
    expect(r.length).toBeLessThanOrEqual(360);
    for (let i = 1; i < r.length; i++) expect(r[i]!.ts_ms - r[i - 1]!.ts_ms).toBe(10_000);
    for (const x of r) expect(x.value).toBe(3.14);
  });

  it('follows a step through its first-order lag', () => {
    const lagged = { ...TAG, instrument: { ...TAG.instrument, lag_s: 60 } };
    const r = run(lagged, [], (t) => (t < 0.1 ? 2 : 4), 0.2);
    // One time constant after the step the reading has covered 1 − e⁻¹ ≈ 63 % of it.
    const oneTau = r.find((x) => x.ts_ms >= EPOCH + 360_000 + 60_000)!;
    expect(oneTau.value!).toBeGreaterThan(2 + 2 * 0.55);
    expect(oneTau.value!).toBeLessThan(2 + 2 * 0.72);
    expect(r.at(-1)!.value).toBeCloseTo(4, 1);
  });

  it('adds noise of the stated standard deviation, reproducibly per seed', () => {
    const noisy = { ...TAG, instrument: { ...TAG.instrument, noiseSd: 0.05, resolution: 0.0001 } };
    const a = run(noisy, [], () => 3, 10);
    const sd = Math.sqrt(a.reduce((s, x) => s + (x.value! - 3) ** 2, 0) / a.length);
    expect(sd).toBeGreaterThan(0.045);
    expect(sd).toBeLessThan(0.055);
    expect(run(noisy, [], () => 3, 1).map((x) => x.value)).toEqual(a.slice(0, run(noisy, [], () => 3, 1).length).map((x) => x.value));
    expect(run(noisy, [], () => 3, 1, 2).map((x) => x.value)).not.toEqual(run(noisy, [], () => 3, 1, 1).map((x) => x.value));
  });

  it('saturates beyond the NE 43 signal range and flags uncertain', () => {
    const r = run(TAG, [], () => 12, 0.05);
    for (const x of r) {
      expect(x.value).toBeCloseTo(10.31, 6);
      expect(x.quality).toBe('uncertain');
    }
  });

  it('applies each fault only inside its window', () => {
    const w = (kind: FaultSpec['kind'], magnitude?: number): FaultSpec[] => [{ tag: 'AIT-111', kind, at_h: 1, duration_h: 1, ...(magnitude !== undefined ? { magnitude } : {}) }];
    const inWin = (x: Reading) => x.ts_ms >= EPOCH + 3_600_000 && x.ts_ms < EPOCH + 7_200_000;
    const ramp = (t: number) => 2 + t; // rising true value, so a frozen reading is visible

    const drop = run(TAG, w('dropout'), ramp, 3);
    expect(drop.some(inWin)).toBe(false);
    expect(drop.length).toBeGreaterThan(700);

    const bad = run(TAG, w('bad'), ramp, 3);
    expect(bad.filter(inWin).every((x) => x.quality === 'bad' && x.value === null)).toBe(true);
    expect(bad.filter((x) => !inWin(x)).every((x) => x.quality === 'good' && x.value !== null)).toBe(true);

    const flat = run(TAG, w('flatline'), ramp, 3);
    const held = new Set(flat.filter(inWin).map((x) => x.value));
    expect(held.size).toBe(1);
    expect([...held][0]).toBeCloseTo(3, 1);
    expect(flat.filter((x) => x.ts_ms >= EPOCH + 7_200_000).at(-1)!.value).toBeCloseTo(5, 1);

    const spike = run(TAG, w('spike', 4), () => 3, 3);
    expect(spike.filter((x) => x.value! > 5).length).toBe(1);
    expect(inWin(spike.find((x) => x.value! > 5)!)).toBe(true);

    const skew = run(TAG, w('skew', 900), () => 3, 3);
    const stamps = skew.map((x) => x.ts_ms);
    const jumps = stamps.slice(1).map((t, i) => t - stamps[i]!);
    expect(jumps.filter((j) => j === 910_000)).toHaveLength(1); // clock jumps 15 min ahead …
    expect(jumps.filter((j) => j === -890_000)).toHaveLength(1); // … and back when it is fixed

    const drift = run(TAG, w('drift', 0.1), () => 3, 3);
    const lastIn = drift.filter(inWin).at(-1)!;
    expect(lastIn.value!).toBeGreaterThan(3 * 0.89);
    expect(lastIn.value!).toBeLessThan(3 * 0.91);
    expect(drift.at(-1)!.value).toBe(3);
  });
});
