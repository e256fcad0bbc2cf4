import { rasConcMaxFlux_gL } from '../../../shared/domain/flux.ts';
import type { VesilindParams } from '../../../shared/domain/settling.ts';
import { mulberry32 } from './prng.ts';

/**
 * Hourly operation of a clarifier of 1500 m² and 4 m side-water depth (the fixture's) whose sludge
 * follows Vesilind v = v0·e^(−kX) (Vesilind 1968) exactly: each hour holds one RAS flow, the WAS at
 * 20 m³/h and the blanket steady at 1.5 m (above a quarter of the depth), and the underflow at the
 * maximum of solids-flux theory X_R = G_L/u for u = (Q_R + Q_W)/A (Keinath et al. 1977; computed by
 * flux.ts, itself checked against the published closed form). u takes 12 values 0.2 … 0.6 m/h
 * in a scrambled order (hour h: 0.2 + 0.4·((7h) mod 12)/11), so any window of a day spans them.
 */
export const OPERATING_AREA_M2 = 1500;
export const OPERATING_WAS_M3H = 20;
export function operatingUnderflowRate(hourIndex: number): number {
  return 0.2 + (0.4 * ((7 * hourIndex) % 12)) / 11;
}
export interface OperatingMinute {
  t_ms: number;
  level_m: number;
  rasFlow_m3h: number;
  wasFlow_m3h: number;
  underflowTss_gL: number;
}
/**
 * Every minute of `hours` whole hours from the hour-aligned `from_ms`; hour index counted from the
 * Unix epoch so any span is reproducible. With `noise`, each hour's underflow TSS is multiplied by
 * e^(sd·z), z a standard normal deviate by Box–Muller (Box & Muller 1958, Ann. Math. Stat. 29:610)
 * from the seeded generator: log-normal measurement noise of relative size sd.
 */
export function operatingMinutes(truth: VesilindParams, from_ms: number, hours: number, noise?: { sd: number; seed: number }): OperatingMinute[] {
  const out: OperatingMinute[] = [];
  const rnd = mulberry32(noise?.seed ?? 1);
  for (let h = 0; h < hours; h++) {
    const start = from_ms + h * 3_600_000;
    const u = operatingUnderflowRate(Math.round(start / 3_600_000));
    const z = Math.sqrt(-2 * Math.log(1 - rnd())) * Math.cos(2 * Math.PI * rnd());
    const xr = rasConcMaxFlux_gL(u, truth).value! * Math.exp((noise?.sd ?? 0) * z);
    for (let m = 0; m < 60; m++) out.push({ t_ms: start + m * 60_000, level_m: 1.5, rasFlow_m3h: u * OPERATING_AREA_M2 - OPERATING_WAS_M3H, wasFlow_m3h: OPERATING_WAS_M3H, underflowTss_gL: xr });
  }
  return out;
}
