/**
 * Layered one-dimensional secondary settler with the Takács double-exponential settling
 * velocity (Takács, Patry & Nolasco 1991, Water Research 25(10):1263–1271), configured by
 * default as the IWA Benchmark Simulation Model No. 1 settler (Alex et al. 2008, "Benchmark
 * Simulation Model no. 1 (BSM1)", IWA Taskgroup technical report).
 *
 * Units (Flocstream internal): concentrations g/L (= kg/m³), flows m³/h, velocities m/h,
 * lengths m, time h. BSM1 publishes m/d and g/m³; the defaults below are converted.
 *
 * Layers are indexed top to bottom: index 0 is the surface layer (its concentration is the
 * effluent TSS), the last index is the floor layer (its concentration is the underflow TSS).
 */
import { DomainValidationError } from './errors.js';

/** Takács double-exponential parameters in Flocstream units. */
export interface TakacsParams {
  /** Maximum practical settling velocity v0' [m/h]. */
  v0Max_mh: number;
  /** Maximum Vesilind settling velocity v0 [m/h]. */
  v0_mh: number;
  /** Hindered-zone settling parameter rh [L/g]. */
  rh_Lg: number;
  /** Flocculant-zone settling parameter rp [L/g]. */
  rp_Lg: number;
  /** Non-settleable fraction of the feed solids [-]. */
  fns: number;
  /** Threshold concentration of the clarification zone Xt [g/L]. */
  xt_gL: number;
}

/**
 * BSM1 settler parameters (Alex et al. 2008, BSM1 technical report, Table of settler
 * parameters) converted from m/d and m³/g: v0' = 250 m/d, v0 = 474 m/d, rh = 0.000576 m³/g,
 * rp = 0.00286 m³/g, fns = 0.00228, Xt = 3000 g/m³.
 */
export const BSM1_TAKACS: TakacsParams = Object.freeze({
  v0Max_mh: 250 / 24,
  v0_mh: 474 / 24,
  rh_Lg: 0.576,
  rp_Lg: 2.86,
  fns: 0.00228,
  xt_gL: 3.0,
});

/** Geometry and settling parameters of one layered settler. */
export interface SettlerConfig {
  area_m2: number;
  depth_m: number;
  layers: number;
  /** Feed layer, 1-based, counted from the top. */
  feedLayer: number;
  takacs: TakacsParams;
}

/** BSM1 settler geometry (Alex et al. 2008): 1500 m², 4 m deep, 10 layers, feed into layer 5 from the top. */
export const BSM1_SETTLER: SettlerConfig = Object.freeze({
  area_m2: 1500,
  depth_m: 4,
  layers: 10,
  feedLayer: 5,
  takacs: BSM1_TAKACS,
});

/** Flows and feed solids applied to the settler. Effluent flow is feed − underflow. */
export interface SettlerInputs {
  feedFlow_m3h: number;
  feedTss_gL: number;
  underflowFlow_m3h: number;
}

/**
 * Takács double-exponential settling velocity (Takács, Patry & Nolasco 1991; BSM1 form per
 * Alex et al. 2008): vs = max(0, min(v0', v0·(exp(−rh·(X − Xmin)) − exp(−rp·(X − Xmin))))),
 * with Xmin = fns·Xf the non-settleable concentration derived from the feed TSS. Returns m/h.
 */
export function takacsVelocity_mh(x_gL: number, feedTss_gL: number, p: TakacsParams): number {
  const d = x_gL - p.fns * feedTss_gL;
  const v = p.v0_mh * (Math.exp(-p.rh_Lg * d) - Math.exp(-p.rp_Lg * d));
  return Math.max(0, Math.min(p.v0Max_mh, v));
}

function checkConfig(cfg: SettlerConfig): void {
  if (!(cfg.area_m2 > 0) || !Number.isFinite(cfg.area_m2)) throw new DomainValidationError('area_m2', 'settler area must be a positive finite number');
  if (!(cfg.depth_m > 0) || !Number.isFinite(cfg.depth_m)) throw new DomainValidationError('depth_m', 'settler depth must be a positive finite number');
  if (!Number.isInteger(cfg.layers) || cfg.layers < 2) throw new DomainValidationError('layers', 'a layered settler needs an integer number of layers ≥ 2');
  if (!Number.isInteger(cfg.feedLayer) || cfg.feedLayer < 1 || cfg.feedLayer > cfg.layers) {
    throw new DomainValidationError('feedLayer', `feed layer must be an integer from 1 to ${cfg.layers}`);
  }
}

function checkInputs(inp: SettlerInputs): void {
  if (!(inp.feedFlow_m3h >= 0) || !Number.isFinite(inp.feedFlow_m3h)) throw new DomainValidationError('feedFlow_m3h', 'feed flow must be a finite number ≥ 0');
  if (!(inp.feedTss_gL >= 0) || !Number.isFinite(inp.feedTss_gL)) throw new DomainValidationError('feedTss_gL', 'feed TSS must be a finite number ≥ 0');
  if (!(inp.underflowFlow_m3h >= 0) || !Number.isFinite(inp.underflowFlow_m3h)) throw new DomainValidationError('underflowFlow_m3h', 'underflow must be a finite number ≥ 0');
  if (inp.underflowFlow_m3h > inp.feedFlow_m3h) throw new DomainValidationError('underflowFlow_m3h', 'underflow cannot exceed the feed flow (effluent flow would be negative)');
}

/**
 * Right-hand side of the layered settler mass balance, dX/dt per layer in g/L per h, with the
 * BSM1 flux rules (Alex et al. 2008; Takács et al. 1991): the gravity flux across the interface
 * below layer i is J = vs(Xi)·Xi above the feed layer while the layer below holds X ≤ Xt,
 * otherwise J = min(vs(Xi)·Xi, vs(Xi+1)·Xi+1); no gravity flux leaves the floor layer or enters
 * the surface layer. Bulk transport is up-flow Qe/A above the feed layer and down-flow Qu/A
 * below it; the feed layer receives Qf·Xf/A and loses (Qe+Qu)/A·Xfeed-layer.
 */
export function settlerDerivatives(cfg: SettlerConfig, inp: SettlerInputs, layers_gL: Float64Array, out?: Float64Array): Float64Array {
  checkConfig(cfg);
  checkInputs(inp);
  const n = cfg.layers;
  if (layers_gL.length !== n) throw new DomainValidationError('layers_gL', `expected ${n} layer concentrations, got ${layers_gL.length}`);
  const dx = out ?? new Float64Array(n);
  const h = cfg.depth_m / n;
  const m = cfg.feedLayer - 1;
  const vUp = (inp.feedFlow_m3h - inp.underflowFlow_m3h) / cfg.area_m2;
  const vDn = inp.underflowFlow_m3h / cfg.area_m2;
  const p = cfg.takacs;
  const xf = inp.feedTss_gL;

  // Gravity flux (kg/m²/h) across the interface below layer i, i = 0..n-2.
  const flux = (i: number): number => {
    const xi = layers_gL[i]!;
    const xb = layers_gL[i + 1]!;
    const ji = takacsVelocity_mh(xi, xf, p) * xi;
    const jb = takacsVelocity_mh(xb, xf, p) * xb;
    if (i < m && xb <= p.xt_gL) return ji;
    return Math.min(ji, jb);
  };

  let jAbove = 0; // gravity flux into layer i from above
  for (let i = 0; i < n; i++) {
    const xi = layers_gL[i]!;
    const jBelow = i < n - 1 ? flux(i) : 0;
    let bulk: number;
    if (i < m) {
      bulk = vUp * (layers_gL[i + 1]! - xi);
    } else if (i === m) {
      bulk = (inp.feedFlow_m3h * xf) / cfg.area_m2 - (vUp + vDn) * xi;
    } else {
      bulk = vDn * (layers_gL[i - 1]! - xi);
    }
    dx[i] = (bulk + jAbove - jBelow) / h;
    jAbove = jBelow;
  }
  return dx;
}

/**
 * Largest explicit-Euler step (h) that keeps the upwind layered scheme positive and stable:
 * half the layer height over a bound of the fastest characteristic speed. For the Takács
 * curve the flux slope |d(vs·X)/dX| is bounded by v0' + 2·v0·e⁻¹·exp(rp·Xmin) (each
 * exponential term x·r·e^(−r·x) peaks at 1/e), to which the bulk velocities are added.
 */
function stableStep_h(cfg: SettlerConfig, inp: SettlerInputs): number {
  const p = cfg.takacs;
  const h = cfg.depth_m / cfg.layers;
  const xmin = p.fns * inp.feedTss_gL;
  const fluxSlope = p.v0Max_mh + ((2 * p.v0_mh) / Math.E) * Math.exp(p.rp_Lg * xmin);
  const bulk = inp.feedFlow_m3h / cfg.area_m2;
  return (0.5 * h) / (fluxSlope + bulk + 1e-12);
}

/**
 * Advances the layered settler by dt_h hours in place, by explicit Euler sub-steps no larger
 * than the stability bound of the upwind scheme (method of lines on the Takács et al. 1991 /
 * BSM1 layer balances). Concentrations are clipped at zero against round-off only.
 */
export function stepSettler(cfg: SettlerConfig, inp: SettlerInputs, layers_gL: Float64Array, dt_h: number): void {
  if (!(dt_h >= 0) || !Number.isFinite(dt_h)) throw new DomainValidationError('dt_h', 'time step must be a finite number ≥ 0');
  if (dt_h === 0) return;
  checkConfig(cfg);
  checkInputs(inp);
  const maxStep = stableStep_h(cfg, inp);
  const steps = Math.max(1, Math.ceil(dt_h / maxStep));
  const sub = dt_h / steps;
  const d = new Float64Array(cfg.layers);
  for (let s = 0; s < steps; s++) {
    settlerDerivatives(cfg, inp, layers_gL, d);
    for (let i = 0; i < cfg.layers; i++) layers_gL[i] = Math.max(0, layers_gL[i]! + sub * d[i]!);
  }
}

/**
 * The work a steady-state solve may spend: at most `maxIter` explicit steps and, when a
 * deadline is given, no step started after `now() ≥ deadline_ms` (the clock is passed in, so
 * this module stays pure and a test can drive it). The clock is read every `CLOCK_EVERY` steps.
 */
export interface SettlerBudget {
  maxIter?: number;
  deadline?: { now: () => number; deadline_ms: number };
}

/** Why a steady-state solve stopped. */
export type SettlerStop = 'converged' | 'iterations' | 'deadline';

const CLOCK_EVERY = 256;

/**
 * Steady state of the layered settler by pseudo-transient continuation: integrates the
 * layer balances (Takács et al. 1991; BSM1 rules, Alex et al. 2008) from the initial profile
 * (default: every layer at the feed TSS) until the largest |dX/dt|·h, expressed as a fraction
 * of the applied solids flux Qf·Xf/A, falls below tol (default 1e-10). Reports why it stopped
 * (`stop`) rather than throwing when the budget is spent: maxIter explicit steps (default
 * 2 000 000) or the deadline of `budget.deadline`.
 */
export function solveSettlerSteadyState(
  cfg: SettlerConfig,
  inp: SettlerInputs,
  opts?: { initial_gL?: Float64Array; tol?: number } & SettlerBudget,
): { layers_gL: number[]; effluentTss_gL: number; underflowTss_gL: number; converged: boolean; stop: SettlerStop; iterations: number } {
  checkConfig(cfg);
  checkInputs(inp);
  const n = cfg.layers;
  const tol = opts?.tol ?? 1e-10;
  const maxIter = opts?.maxIter ?? 2_000_000;
  if (!Number.isInteger(maxIter) || maxIter < 0) throw new DomainValidationError('maxIter', 'the iteration budget must be an integer ≥ 0');
  const deadline = opts?.deadline;
  const x = opts?.initial_gL ? Float64Array.from(opts.initial_gL) : new Float64Array(n).fill(inp.feedTss_gL);
  if (x.length !== n) throw new DomainValidationError('initial_gL', `expected ${n} layer concentrations, got ${x.length}`);
  const h = cfg.depth_m / n;
  const feedFlux = (inp.feedFlow_m3h * inp.feedTss_gL) / cfg.area_m2;
  const scale = Math.max(feedFlux, 1e-9);
  const dt = stableStep_h(cfg, inp);
  const d = new Float64Array(n);
  let stop: SettlerStop = 'iterations';
  let it = 0;
  while (it < maxIter) {
    if (deadline && it % CLOCK_EVERY === 0 && deadline.now() >= deadline.deadline_ms) {
      stop = 'deadline';
      break;
    }
    settlerDerivatives(cfg, inp, x, d);
    let worst = 0;
    for (let i = 0; i < n; i++) worst = Math.max(worst, Math.abs(d[i]!) * h);
    if (worst / scale < tol) {
      stop = 'converged';
      break;
    }
    for (let i = 0; i < n; i++) x[i] = Math.max(0, x[i]! + dt * d[i]!);
    it++;
  }
  const layers = Array.from(x);
  return { layers_gL: layers, effluentTss_gL: layers[0]!, underflowTss_gL: layers[n - 1]!, converged: stop === 'converged', stop, iterations: it };
}

/**
 * Height of the sludge-blanket top above the floor [m]: scanning from the surface, the first
 * layer whose concentration reaches threshold_gL marks the blanket; its height is linearly
 * interpolated between that layer's centre and the centre of the layer above it. Returns the
 * full depth if the surface layer already reaches the threshold and 0 if no layer does. The
 * threshold is a plant setting (a blanket detector's set point is common practice of the trade).
 */
export function blanketHeight_m(cfg: SettlerConfig, layers_gL: ArrayLike<number>, threshold_gL: number): number {
  const n = layers_gL.length;
  if (n === 0) return 0;
  const h = cfg.depth_m / n;
  const centre = (i: number): number => cfg.depth_m - (i + 0.5) * h;
  for (let i = 0; i < n; i++) {
    const xi = layers_gL[i]!;
    if (xi >= threshold_gL) {
      if (i === 0) return cfg.depth_m;
      const xa = layers_gL[i - 1]!;
      const frac = xi === xa ? 0 : (xi - threshold_gL) / (xi - xa);
      return centre(i) + frac * h;
    }
  }
  return 0;
}

/** Solids mass held in the layered settler [kg]: Σ Xi·A·(depth/layers), with g/L = kg/m³. */
export function settlerMass_kg(cfg: SettlerConfig, layers_gL: ArrayLike<number>): number {
  const n = layers_gL.length;
  if (n === 0) return 0;
  const vol = (cfg.area_m2 * cfg.depth_m) / n;
  let m = 0;
  for (let i = 0; i < n; i++) m += layers_gL[i]! * vol;
  return m;
}
