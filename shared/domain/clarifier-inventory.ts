/**
 * Clarifier sludge inventory (design §3 item 7): the solids held in the secondary clarifiers,
 * estimated two independent ways and compared.
 *
 * 1. From the blanket: mass = blanket level × clarifier area × blanket concentration, the
 *    concentration chosen by a plant setting ({@link BlanketConcMethod}).
 * 2. From the clarifier solids balance with accumulation (the steady-state balance of
 *    clarifier-balance.ts with a storage term): dM/dt = (Q + Q_R)·X − (Q_R + Q_W)·X_R − Q_e·X_e,
 *    Q_e = Q − Q_W, integrated over a time series by the trapezoidal rule.
 *
 * A large discrepancy between the two points at a drifting blanket detector, a wrong RAS
 * density reading or a blanket-concentration method that does not suit the plant.
 * Units: flows m³/h, concentrations g/L (= kg/m³), level m, area m², mass kg, time epoch ms
 * on input and h inside. Every result is a {@link Figure}: never NaN, never a silent zero.
 */
import { clarifierBalanceResidual_kgh } from './clarifier-balance.js';
import { combineQuality, propagate, unavailable, type Figure, type Quality } from './quality.js';
import { ms_to_h } from './units.js';

/**
 * How the mean solids concentration of the blanket is obtained (a plant setting):
 * - 'ras': the blanket holds the underflow (RAS) concentration throughout;
 * - 'mean': the average of feed MLSS and RAS solids, i.e. a concentration rising linearly
 *   from the feed MLSS at the blanket top to the RAS solids at the floor;
 * - 'measured': a given value (e.g. a core sampler or a profiling sensor).
 */
export const BLANKET_CONC_METHODS = ['ras', 'mean', 'measured'] as const;
export type BlanketConcMethod = (typeof BLANKET_CONC_METHODS)[number];

/** A plain number (taken as good) or a figure carrying its own quality. */
export type FigureInput = number | Figure<number>;

function asFigure(x: FigureInput | undefined, name: string): Figure<number> {
  if (x === undefined) return unavailable(`${name} not given`);
  if (typeof x === 'number') return Number.isFinite(x) ? { value: x, quality: 'good', reasons: [] } : unavailable(`${name} is not a finite number`);
  if (x.value === null || x.quality === 'unavailable') return unavailable(...(x.reasons.length ? x.reasons : [`${name} unavailable`]));
  return Number.isFinite(x.value) ? x : unavailable(`${name} is not a finite number`);
}

/** Propagates the inputs' qualities into a value computed from them; unavailable if any input is. */
function fromInputs(value: number, inputs: Figure<number>[], ...extraReasons: string[]): Figure<number> {
  const own: Figure<number> = Number.isFinite(value)
    ? { value, quality: extraReasons.length ? 'estimated' : 'good', reasons: extraReasons }
    : unavailable('result is not a finite number');
  return propagate(own, ...inputs);
}

export interface BlanketConcInputs {
  method: BlanketConcMethod;
  /** Feed (aeration tank) MLSS X [g/L]; needed by 'mean'. */
  mlss_gL?: FigureInput;
  /** Underflow / RAS solids X_R [g/L]; needed by 'ras' and 'mean'. */
  rasConc_gL?: FigureInput;
  /** Measured blanket concentration [g/L]; needed by 'measured'. */
  measuredConc_gL?: FigureInput;
}

/**
 * Mean blanket solids concentration [g/L] by the chosen method (design §3 item 7). 'ras' takes
 * X_R; 'mean' takes (X + X_R)/2, which is a modelling assumption of ours — a blanket whose
 * concentration rises linearly from the feed MLSS at its top to X_R at the floor — not a
 * published method; 'measured' takes the given value. The figure carries the inputs' quality;
 * a missing or negative input makes it unavailable with the reason.
 */
export function blanketConcentration_gL(inp: BlanketConcInputs): Figure<number> {
  const need = (x: FigureInput | undefined, name: string): Figure<number> => {
    const f = asFigure(x, name);
    return f.value !== null && f.value < 0 ? unavailable(`${name} must be ≥ 0`) : f;
  };
  switch (inp.method) {
    case 'ras': {
      const xr = need(inp.rasConc_gL, 'RAS solids');
      return xr.value === null ? xr : fromInputs(xr.value, [xr]);
    }
    case 'mean': {
      const x = need(inp.mlss_gL, 'MLSS');
      const xr = need(inp.rasConc_gL, 'RAS solids');
      if (x.value === null || xr.value === null) return unavailable(...combineQuality(x, xr).reasons);
      return fromInputs((x.value + xr.value) / 2, [x, xr]);
    }
    case 'measured': {
      const m = need(inp.measuredConc_gL, 'measured blanket concentration');
      return m.value === null ? m : fromInputs(m.value, [m]);
    }
  }
}

export interface BlanketMassInputs extends BlanketConcInputs {
  /** Blanket top above the clarifier floor [m]. */
  blanketLevel_m: FigureInput;
  /** Total surface area of the clarifiers holding the blanket [m²] (number of units × area of one). */
  clarifierArea_m2: FigureInput;
  /** Side-water depth [m]; when given, a blanket level above it is rejected as a sensor fault. */
  sideWaterDepth_m?: number;
}

/**
 * Blanket solids mass [kg] = blanket level [m] × clarifier area [m²] × blanket concentration
 * [g/L = kg/m³] (design §3 item 7; the concentration from {@link blanketConcentration_gL}).
 * Solids in the clear zone above the blanket are neglected (they are of the order of the
 * effluent TSS). Unavailable for a negative level or area, or a level above the side-water depth.
 */
export function blanketMass_kg(inp: BlanketMassInputs): Figure<number> {
  const level = asFigure(inp.blanketLevel_m, 'blanket level');
  const area = asFigure(inp.clarifierArea_m2, 'clarifier area');
  if (level.value === null || area.value === null) return unavailable(...combineQuality(level, area).reasons);
  if (level.value < 0) return unavailable('blanket level must be ≥ 0 m');
  if (!(area.value > 0)) return unavailable('clarifier area must be positive');
  if (inp.sideWaterDepth_m !== undefined && level.value > inp.sideWaterDepth_m) {
    return unavailable(`blanket level ${level.value} m is above the side-water depth ${inp.sideWaterDepth_m} m: check the blanket detector`);
  }
  const c = blanketConcentration_gL(inp);
  if (c.value === null) return c;
  return fromInputs(level.value * area.value * c.value, [level, area, c]);
}

/** One time-stamped set of clarifier flows and concentrations (what the live engine samples). */
export interface ClarifierBalancePoint {
  /** Epoch milliseconds. */
  t_ms: number;
  influentFlow_m3h: number;
  rasFlow_m3h: number;
  /** Waste flow drawn from the underflow; 0 when omitted. */
  wasFlow_m3h?: number;
  /** Feed MLSS X [g/L]. */
  mlss_gL: number;
  /** Underflow / RAS solids X_R [g/L]. */
  rasConc_gL: number;
  /** Effluent TSS X_e [g/L]; 0 when omitted. */
  effluentTss_gL?: number;
  /** Worst quality of the samples behind this point; good when omitted. */
  quality?: Quality;
  reasons?: string[];
}

export interface IntegrationOptions {
  /**
   * Longest interval [h] between usable points that is still bridged without downgrading the
   * result. Default 0.25 h: our choice, several balance-engine periods; a longer interval is
   * still bridged by the trapezoid (linear interpolation) but makes the result 'estimated'.
   */
  maxGap_h?: number;
}

export interface IntegratedClarifierMass {
  /** ∫ dM/dt dt over the series [kg]: positive when the clarifiers gained solids. */
  accumulated_kg: Figure<number>;
  /** Initial mass + accumulated [kg]. */
  integratedMass_kg: Figure<number>;
  /** Time span of the usable points [h]. */
  span_h: number;
  /** Number of points used. */
  pointsUsed: number;
}

/**
 * Integrates the clarifier solids balance with accumulation,
 * dM/dt = (Q + Q_R)·X − (Q_R + Q_W)·X_R − Q_e·X_e with Q_e = Q − Q_W (mass balance as in
 * clarifier-balance.ts), over a time series by the composite trapezoidal rule (e.g. Press et
 * al., Numerical Recipes, 3rd ed. 2007, §4.1), starting from initialMass_kg. Points are
 * sorted by time; points with invalid values (non-finite, negative, Q_W > Q), unavailable
 * quality or a repeated timestamp are dropped with a reason. The result is 'estimated' when
 * points were dropped, any point is estimated, or an interval exceeds maxGap_h; unavailable
 * with fewer than two usable points or an unavailable initial mass.
 */
export function integrateClarifierMass(
  series: readonly ClarifierBalancePoint[],
  initialMass_kg: FigureInput,
  opts: IntegrationOptions = {},
): IntegratedClarifierMass {
  const maxGap_h = opts.maxGap_h ?? 0.25;
  const reasons: string[] = [];
  let worst: Quality = 'good';
  const sorted = [...series].filter((p) => Number.isFinite(p.t_ms)).sort((a, b) => a.t_ms - b.t_ms);
  let dropped = series.length - sorted.length;
  let duplicates = 0;
  const used: { t_h: number; rate_kgh: number }[] = [];
  for (const p of sorted) {
    if (p.quality === 'unavailable') {
      dropped++;
      continue;
    }
    const r = clarifierBalanceResidual_kgh({
      influentFlow_m3h: p.influentFlow_m3h,
      rasFlow_m3h: p.rasFlow_m3h,
      wasFlow_m3h: p.wasFlow_m3h,
      mlss_gL: p.mlss_gL,
      effluentTss_gL: p.effluentTss_gL,
      rasConc_gL: p.rasConc_gL,
    });
    if (r.value === null) {
      dropped++;
      continue;
    }
    const t_h = ms_to_h(p.t_ms);
    if (used.length > 0 && used[used.length - 1]!.t_h === t_h) {
      duplicates++;
      continue;
    }
    if (p.quality === 'estimated') {
      worst = 'estimated';
      for (const why of p.reasons ?? []) if (!reasons.includes(why)) reasons.push(why);
    }
    used.push({ t_h, rate_kgh: r.value });
  }
  if (dropped > 0) reasons.push(`${dropped} point(s) with invalid or unavailable values left out`);
  if (duplicates > 0) reasons.push(`${duplicates} point(s) with a repeated timestamp left out`);
  const span_h = used.length > 1 ? used[used.length - 1]!.t_h - used[0]!.t_h : 0;
  const m0 = asFigure(initialMass_kg, 'initial clarifier mass');
  if (used.length < 2) {
    const u = unavailable<number>('at least two usable points are needed to integrate the clarifier balance', ...reasons);
    return { accumulated_kg: u, integratedMass_kg: u, span_h, pointsUsed: used.length };
  }
  let acc = 0;
  let gaps = 0;
  let gapTime_h = 0;
  for (let i = 1; i < used.length; i++) {
    const a = used[i - 1]!;
    const b = used[i]!;
    const dt = b.t_h - a.t_h;
    if (dt > maxGap_h) {
      gaps++;
      gapTime_h += dt;
    }
    acc += 0.5 * (a.rate_kgh + b.rate_kgh) * dt;
  }
  if (gaps > 0) reasons.push(`${gaps} gap(s) longer than ${maxGap_h} h (${gapTime_h.toFixed(2)} h in all) bridged by linear interpolation`);
  if (gaps > 0 || dropped > 0 || duplicates > 0) worst = 'estimated';
  const accumulated: Figure<number> = Number.isFinite(acc) ? { value: acc, quality: worst, reasons } : unavailable('integral is not a finite number');
  const integrated: Figure<number> =
    m0.value === null || accumulated.value === null
      ? unavailable(...combineQuality(m0, accumulated).reasons)
      : propagate({ value: m0.value + accumulated.value, quality: 'good', reasons: [] }, m0, accumulated);
  return { accumulated_kg: accumulated, integratedMass_kg: integrated, span_h, pointsUsed: used.length };
}

export interface InventoryCrossCheck extends IntegratedClarifierMass {
  /** Blanket-based mass at the end of the series [kg]. */
  blanketMass_kg: Figure<number>;
  /** Integrated − blanket-based mass [kg]. */
  discrepancy_kg: Figure<number>;
  /** Discrepancy relative to the blanket-based mass [-]. */
  discrepancyFraction: Figure<number>;
}

/**
 * Cross-check of the clarifier inventory (design §3 item 7): the balance integral of
 * {@link integrateClarifierMass} from initialMass_kg (typically the blanket-based mass at the
 * start of the window) against the blanket-based mass at its end ({@link blanketMass_kg}),
 * with the discrepancy in kg and as a fraction of the blanket-based mass. Each figure carries
 * the worse quality of both sides.
 */
export function crossCheckClarifierInventory(
  series: readonly ClarifierBalancePoint[],
  initialMass_kg: FigureInput,
  blanketAtEnd: BlanketMassInputs | FigureInput,
  opts: IntegrationOptions = {},
): InventoryCrossCheck {
  const integ = integrateClarifierMass(series, initialMass_kg, opts);
  const blanket =
    typeof blanketAtEnd === 'object' && 'method' in blanketAtEnd ? blanketMass_kg(blanketAtEnd) : asFigure(blanketAtEnd, 'blanket-based mass');
  const im = integ.integratedMass_kg;
  let discrepancy: Figure<number>;
  let fraction: Figure<number>;
  if (im.value === null || blanket.value === null) {
    discrepancy = unavailable(...combineQuality(im, blanket).reasons);
    fraction = discrepancy;
  } else {
    discrepancy = fromInputs(im.value - blanket.value, [im, blanket]);
    fraction =
      blanket.value > 0
        ? fromInputs((im.value - blanket.value) / blanket.value, [im, blanket])
        : unavailable('blanket-based mass is zero: relative discrepancy undefined');
  }
  return { ...integ, blanketMass_kg: blanket, discrepancy_kg: discrepancy, discrepancyFraction: fraction };
}
