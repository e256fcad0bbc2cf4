/**
 * Field instruments of the simulated plant: each tag's transmitter sees the model's true
 * value through a first-order lag, adds Gaussian noise, quantises to its resolution and
 * reports at its own sample period, with faults switched on by the scenario.
 *
 * Out-of-range readings saturate like a 4–20 mA loop: the signal range is −1.25 % … +103.1 %
 * of span (NAMUR NE 43 measurement limits 3.8 / 20.5 mA — from memory, check the
 * recommendation), beyond which the value is clamped and flagged uncertain.
 */
import { Prng, streamSeed } from '../model/prng.js';
import type { DemoTag } from '../plant/demo-plant.js';
import type { FaultSpec } from '../scenarios/scenario.schema.js';
import type { PayloadQuality } from '../../shared/contracts/mqtt-payload.js';

export interface Reading {
  tag: DemoTag;
  /** Source timestamp, epoch ms of simulated time (shifted under a clock-skew fault). */
  ts_ms: number;
  /** Engineering value; null only with quality "bad". */
  value: number | null;
  quality: PayloadQuality;
  /** Why the quality is not good, for the OPC UA status code. */
  reason?: 'saturated' | 'sensor-failure';
}

const SAT_LOW = -0.0125;
const SAT_HIGH = 0.03125;

export class Instrument {
  private filtered: number | null = null;
  private nextSample_h: number;
  private readonly period_h: number;
  private readonly prng: Prng;
  private held: number | null = null;
  private last: number | null = null;
  private readonly spiked = new Set<FaultSpec>();

  constructor(
    readonly tag: DemoTag,
    private readonly faults: FaultSpec[],
    seed: number,
  ) {
    this.prng = new Prng(streamSeed(seed, `instrument:${tag.name}`));
    this.period_h = tag.expectedPeriod_s / 3600;
    // Transmitters are not synchronised: each starts at its own phase within its period.
    this.nextSample_h = this.prng.next() * this.period_h;
  }

  /** Feeds the true value over one model step of dt_h (exact first-order lag). */
  track(trueValue: number, dt_h: number): void {
    const tau_h = this.tag.instrument.lag_s / 3600;
    if (this.filtered === null || tau_h <= 0) this.filtered = trueValue;
    else this.filtered += (trueValue - this.filtered) * (1 - Math.exp(-dt_h / tau_h));
  }

  private active(kind: FaultSpec['kind'], t_h: number): FaultSpec | undefined {
    return this.faults.find((f) => f.kind === kind && t_h >= f.at_h && t_h < f.at_h + f.duration_h);
  }

  /** Readings due up to simulated time t_h; epoch0_ms is the wall-clock time of t = 0. */
  sample(t_h: number, epoch0_ms: number, out: Reading[]): void {
    while (this.nextSample_h <= t_h && this.filtered !== null) {
      const ts = this.nextSample_h;
      this.nextSample_h += this.period_h;
      const r = this.read(ts, epoch0_ms);
      if (r) out.push(r);
    }
  }

  private read(t_h: number, epoch0_ms: number): Reading | null {
    const tag = this.tag;
    const skew = this.active('skew', t_h);
    const ts_ms = Math.round(epoch0_ms + t_h * 3_600_000 + (skew ? (skew.magnitude ?? 0) * 1000 : 0));
    const noise = tag.instrument.noiseSd > 0 ? tag.instrument.noiseSd * this.prng.gaussian() : 0;
    if (this.active('dropout', t_h)) return null;
    if (this.active('bad', t_h)) return { tag, ts_ms, value: null, quality: 'bad', reason: 'sensor-failure' };
    let v = this.filtered! + noise;
    const drift = this.active('drift', t_h);
    if (drift) v *= Math.max(0, 1 - (drift.magnitude ?? 0) * (t_h - drift.at_h));
    const spike = this.active('spike', t_h);
    if (spike && !this.spiked.has(spike)) {
      this.spiked.add(spike);
      v += spike.magnitude ?? 0;
    }
    const span = tag.rangeHigh - tag.rangeLow;
    const lo = tag.rangeLow + SAT_LOW * span;
    const hi = tag.rangeHigh + SAT_HIGH * span;
    let quality: PayloadQuality = 'good';
    let reason: Reading['reason'];
    if (v < lo || v > hi) {
      v = Math.min(hi, Math.max(lo, v));
      quality = 'uncertain';
      reason = 'saturated';
    }
    const res = tag.instrument.resolution;
    v = res > 0 ? Math.round(v / res) * res : v;
    // Round-off of the quantisation (e.g. 0.1 × 3) is removed so payloads carry clean decimals.
    v = Number(v.toFixed(Math.max(0, Math.ceil(-Math.log10(res)) + 1)));
    if (this.active('flatline', t_h)) {
      if (this.held === null) this.held = this.last ?? v;
      v = this.held;
    } else {
      this.held = null;
    }
    this.last = v;
    return reason ? { tag, ts_ms, value: v, quality, reason } : { tag, ts_ms, value: v, quality };
  }
}
