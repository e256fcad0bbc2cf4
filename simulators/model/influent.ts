/**
 * Influent to the invented plant: a dry-weather diurnal pattern (two harmonics, a common
 * shape for municipal sewage), slow seeded AR(1) variation, scheduled storms and optional
 * random showers. BOD follows the flow in the day (the load peaks more than the flow) and
 * rain water is dilute, so a storm raises the flow much more than the load.
 */
import type { Prng } from './prng.js';
import type { Scenario, StormEvent } from '../scenarios/scenario.schema.js';

export interface InfluentNow {
  flow_m3h: number;
  /** BOD load [kg/h] (m³/h × g/m³ / 1000). */
  bodLoad_kgh: number;
  /** Storm (rain) part of the flow [m³/h]. */
  stormFlow_m3h: number;
}

/** Storm hydrograph as a fraction of its peak: linear rise, plateau, exponential recession. */
export function stormShape(ev: StormEvent, t_h: number): number {
  const dt = t_h - ev.start_h;
  if (dt < 0) return 0;
  if (dt < ev.rise_h) return dt / ev.rise_h;
  if (dt <= ev.duration_h) return 1;
  if (ev.recession_h <= 0) return 0;
  return Math.exp(-(dt - ev.duration_h) / ev.recession_h);
}

export class Influent {
  private noise = 0;
  private readonly rain: StormEvent[] = [];
  private rainHorizon_h = 0;

  constructor(
    private readonly cfg: Scenario['influent'],
    private readonly prng: Prng,
    /** Hour of day (0–24) at simulated time zero, so the diurnal pattern follows the clock. */
    private readonly startHourOfDay: number,
  ) {}

  /** Advances the AR(1) variation by dt_h (exact discretisation of an Ornstein–Uhlenbeck process). */
  advance(dt_h: number): void {
    const { sd, tau_h } = this.cfg.noise;
    if (sd === 0) return;
    const a = Math.exp(-dt_h / tau_h);
    this.noise = a * this.noise + sd * Math.sqrt(1 - a * a) * this.prng.gaussian();
  }

  /** Random showers up to t_h, drawn lazily so the same seed yields the same showers. */
  private showersUntil(t_h: number): StormEvent[] {
    const r = this.cfg.randomRain;
    if (!r) return this.rain;
    while (this.rainHorizon_h <= t_h + 48) {
      const start = this.rainHorizon_h + this.prng.exponential(r.meanInterval_h);
      const duration = Math.max(0.25, this.prng.exponential(r.meanDuration_h));
      const multiplier = r.multiplierMin + (r.multiplierMax - r.multiplierMin) * this.prng.next();
      this.rain.push({ start_h: start, duration_h: duration, rise_h: 0.5, recession_h: 1.5, multiplier });
      this.rainHorizon_h = start + duration;
    }
    return this.rain;
  }

  at(t_h: number): InfluentNow {
    const c = this.cfg;
    const hour = (((this.startHourOfDay + t_h) % 24) + 24) % 24;
    const phase = (2 * Math.PI * (hour - c.diurnal.peakHour)) / 24;
    const shape = 1 + c.diurnal.amplitude * Math.cos(phase) + c.diurnal.secondAmplitude * Math.cos(2 * phase);
    const dry = c.averageFlow_m3h * shape * (1 + this.noise);
    // Concentration swings with half the flow amplitude, so the load swings by about 1.5×.
    const bodDry = c.bod_gm3 * (1 + 0.5 * c.diurnal.amplitude * Math.cos(phase));
    let stormFactor = 0;
    for (const ev of c.storms) stormFactor += (ev.multiplier - 1) * stormShape(ev, t_h);
    for (const ev of this.showersUntil(t_h)) stormFactor += (ev.multiplier - 1) * stormShape(ev, t_h);
    const storm = c.averageFlow_m3h * stormFactor;
    return { flow_m3h: dry + storm, bodLoad_kgh: (dry * bodDry + storm * c.stormBod_gm3) / 1000, stormFlow_m3h: storm };
  }
}
