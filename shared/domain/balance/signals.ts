/**
 * Input signals of the balance: the latest value of every mapped tag as a figure in base units
 * with its quality, staleness and reasons, and the tag's rollup series in base units.
 *
 * Two clocks are kept apart. Samples carry the source's timestamp; a simulator running faster
 * than real time stamps ahead of the wall clock. The *plant clock* is the newest sample time of
 * the plant: rolling windows (SRT, clarifier integral, blanket rate) end there, so they hold the
 * same process time at any simulation speed. *Staleness* is the wall-clock age of the receive
 * time (did ingest hear from the tag lately?) against `inputs.stale_factor` × the tag's expected
 * period: against the wall clock a sped-up source is always "in the future", and against the
 * plant clock a tag polled once a wall second lags 60 process seconds at 60× although nothing is
 * wrong. The lag behind the plant clock is still reported per input. A stale value is used
 * (estimated, with the reason) up to `inputs.max_age_s`, then it is unavailable.
 */
import type { BalanceInputs } from '../../contracts/balance.js';
import type { SignalKindName } from '../../contracts/plant-layout.js';
import { qualityFlags, qualityGrade } from '../../contracts/sample-quality.js';
import { estimated, good, unavailable, type Figure } from '../quality.js';
import { UNITS, unitFactor, type Dimension } from '../units.js';
import type { BalanceEngineInputs, LayoutIn, SeriesPoint, SignalReading, SviReading, TargetType } from './inputs.js';
import { seriesInBaseUnit, type MinuteSeries } from './series.js';

export type SignalInput = BalanceInputs['signals'][number];

/** The physical dimension of each signal kind (its tag unit must be one of that dimension). */
export const SIGNAL_DIMENSION: Readonly<Record<SignalKindName, Dimension>> = Object.freeze({
  'plant.influentFlow': 'flow',
  'plant.effluentFlow': 'flow',
  'basin.influentFlow': 'flow',
  'basin.mlss': 'concentration',
  'clarifier.blanketLevel': 'length',
  'clarifier.underflowTss': 'concentration',
  'clarifier.effluentTss': 'concentration',
  'pump.flow': 'flow',
  'pump.running': 'state',
});

/** Factor from a tag's unit to the base unit of its signal's dimension, or null when the unit does not fit the signal. */
export function signalUnitFactor(signal: SignalKindName, unit: string): number | null {
  return unitFactor(SIGNAL_DIMENSION[signal], unit);
}

/** The plant clock: the newest sample time of any reading, or null when nothing was ever received. */
export function plantClock_ms(readings: readonly SignalReading[]): number | null {
  let newest: number | null = null;
  for (const r of readings) if (r.ts_ms !== null && (newest === null || r.ts_ms > newest)) newest = r.ts_ms;
  return newest;
}

/** `type:id` → display code of every plant, train, basin, clarifier and pump of the layout. */
export function targetNames(layout: LayoutIn): Map<string, string> {
  const names = new Map<string, string>([[`plant:${layout.plantId}`, layout.code]]);
  for (const t of layout.trains) {
    names.set(`train:${t.id}`, t.code);
    for (const b of t.basins) names.set(`basin:${b.id}`, b.code);
    for (const c of t.clarifiers) names.set(`clarifier:${c.id}`, c.code);
    for (const p of t.pumps) names.set(`pump:${p.id}`, p.code);
  }
  return names;
}

export interface FreshnessRules {
  /** Wall clock of the computation [epoch ms]. */
  now_ms: number;
  /** Plant clock, or the wall clock when nothing was ever received [epoch ms]. */
  clock_ms: number;
  /** A value is stale beyond this many expected periods (setting inputs.stale_factor). */
  staleFactor: number;
  /** Beyond this age a value is not used at all [s] (setting inputs.max_age_s). */
  maxAge_s: number;
}

const iso = (ms: number) => new Date(ms).toISOString();
const tenths = (v: number) => Math.round(v * 10) / 10;

/**
 * The latest value of one signal as a figure in base units, graded in this order: never
 * received, unit of the wrong dimension, no finite value, bad sample quality, older than the
 * maximum age → unavailable; uncertain sample quality or stale → estimated with the reason;
 * otherwise good. Returns the figure and the input record the balance reports (age and lag in s).
 */
export function latestFigure(r: SignalReading, rules: FreshnessRules, target: string): { figure: Figure<number>; input: SignalInput } {
  const { now_ms, clock_ms, staleFactor, maxAge_s } = rules;
  const factor = signalUnitFactor(r.signal, r.unit);
  const received = r.ts_ms !== null && r.receivedAt_ms !== null;
  const age_s = received ? Math.max(0, (now_ms - r.receivedAt_ms!) / 1000) : Infinity;
  const lag_s = received ? Math.max(0, (clock_ms - r.ts_ms!) / 1000) : Infinity;
  const stale = age_s > staleFactor * r.expectedPeriod_s;
  const grade = qualityGrade(r.qualityCode);
  const flags = qualityFlags(r.qualityCode);
  const flagNote = flags.length ? ` (${flags.join(', ')})` : '';
  const why = (m: string) => `${r.tag}: ${m}`;
  const base = UNITS[SIGNAL_DIMENSION[r.signal]].base;
  let figure: Figure<number>;
  if (!received) figure = unavailable(why('no value received yet'));
  else if (factor === null) figure = unavailable(why(`unit '${r.unit}' does not fit signal ${r.signal} (expected ${base} or a known equivalent)`));
  else if (r.value === null || !Number.isFinite(r.value)) figure = unavailable(why('no value'));
  else if (grade === 'bad') figure = unavailable(why(`bad quality${flagNote}`));
  else if (age_s > maxAge_s) figure = unavailable(why(`stale: last value received ${Math.round(age_s)} s ago, beyond the ${maxAge_s} s it may be used`));
  else {
    const reasons: string[] = [];
    if (grade === 'uncertain') reasons.push(why(`uncertain quality${flagNote}`));
    if (stale) reasons.push(why(`stale: last value received ${Math.round(age_s)} s ago (> ${staleFactor} × ${r.expectedPeriod_s} s expected period); last value used`));
    figure = reasons.length ? estimated(r.value * factor, ...reasons) : good(r.value * factor);
  }
  const input: SignalInput = {
    tagId: r.tagId,
    tag: r.tag,
    signal: r.signal,
    target,
    value: figure.value,
    unit: base,
    quality: figure.quality,
    reasons: figure.reasons,
    ts: received ? iso(r.ts_ms!) : null,
    receivedAt: received ? iso(r.receivedAt_ms!) : null,
    age_s: received ? tenths(age_s) : null,
    lag_s: received ? tenths(lag_s) : null,
    expectedPeriod_s: r.expectedPeriod_s,
    stale,
    bad: received && (factor === null || grade === 'bad'),
  };
  return { figure, input };
}

/** The signals of one plant, looked up by signal kind and target. */
export interface Signals {
  /** Plant clock (newest sample time), null when nothing was ever received. */
  plantClock_ms: number | null;
  /** End of every rolling window: the plant clock, else the wall clock. */
  clock_ms: number;
  /** One record per mapped signal, in the order of the readings. */
  inputs: SignalInput[];
  /** Latest value in base units; unavailable with the reason when no tag is mapped. */
  figure(signal: SignalKindName, type: TargetType, id: number, label: string): Figure<number>;
  /** rollup_1m means in base units within [from_ms, clock_ms], bad buckets left out; empty when no usable tag is mapped. */
  series(signal: SignalKindName, type: TargetType, id: number, from_ms: number): MinuteSeries;
}

/** Reads the latest value and the series of every mapped signal of a plant ({@link latestFigure} per reading). */
export function readSignals(inp: Pick<BalanceEngineInputs, 'now_ms' | 'layout' | 'readings' | 'series'>, rules: { staleFactor: number; maxAge_s: number }): Signals {
  const plantClock = plantClock_ms(inp.readings);
  const clock_ms = plantClock ?? inp.now_ms;
  const names = targetNames(inp.layout);
  const latest = new Map<string, { figure: Figure<number>; points: readonly SeriesPoint[]; factor: number | null }>();
  const inputs: SignalInput[] = [];
  for (const r of inp.readings) {
    const key = `${r.targetType}:${r.targetId}`;
    const { figure, input } = latestFigure(r, { now_ms: inp.now_ms, clock_ms, ...rules }, names.get(key) ?? key);
    latest.set(`${r.signal}|${key}`, { figure, points: inp.series.get(r.tagId) ?? [], factor: signalUnitFactor(r.signal, r.unit) });
    inputs.push(input);
  }
  return {
    plantClock_ms: plantClock,
    clock_ms,
    inputs,
    figure: (signal, type, id, label) => latest.get(`${signal}|${type}:${id}`)?.figure ?? unavailable(`no tag mapped for ${signal} of ${label}`),
    series: (signal, type, id, from_ms) => {
      const l = latest.get(`${signal}|${type}:${id}`);
      return !l || l.factor === null ? new Map() : seriesInBaseUnit(l.points, l.factor, from_ms, clock_ms);
    },
  };
}

/**
 * The latest SVI/DSVI as a figure [mL/g]: unavailable when there is none or it is not positive;
 * estimated when older than `maxAge_d` (setting svi.max_age_d) or flagged by the lab.
 */
export function settleability(svi: SviReading | null, now_ms: number, maxAge_d: number): Figure<number> {
  if (!svi) return unavailable('no SVI or DSVI in the lab results: RAS concentration limit and storm projection need one');
  if (!(svi.value_mLg > 0)) return unavailable(`latest ${svi.kind} is not positive`);
  const age_d = (now_ms - svi.sampledAt_ms) / 86_400_000;
  const why: string[] = [];
  if (age_d > maxAge_d) why.push(`latest ${svi.kind} is ${age_d.toFixed(1)} d old (> ${maxAge_d} d)`);
  if (svi.flags.length) why.push(`latest ${svi.kind} is flagged: ${svi.flags.join(', ')}`);
  return why.length ? estimated(svi.value_mLg, ...why) : good(svi.value_mLg);
}
