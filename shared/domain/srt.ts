/**
 * Sludge age (solids retention time, SRT): steady-state total and aeration-only SRT, a
 * rolling flow-weighted SRT over a window of time series, the dynamic SRT on the age balance
 * (after Takács et al. 2008 [M]), and the WAS flow that holds a target SRT. Mass kg, flows m³/h, concentrations g/L
 * (= kg/m³), time h inside; SRT reported in d.
 */
import { estimated, good, unavailable, type Figure, type Quality } from './quality.js';

export interface SrtInputs {
  aerationMass_kg: number;
  clarifierMass_kg: number;
  wasFlow_m3h: number;
  wasTss_gL: number;
  effluentFlow_m3h: number;
  effluentTss_gL: number;
}

/** Solids leaving the system Q_W·X_W + Q_e·X_e [kg/h]. */
function solidsLoss_kgh(i: Pick<SrtInputs, 'wasFlow_m3h' | 'wasTss_gL' | 'effluentFlow_m3h' | 'effluentTss_gL'>): number {
  return i.wasFlow_m3h * i.wasTss_gL + i.effluentFlow_m3h * i.effluentTss_gL;
}

/**
 * Steady-state SRT (standard definition, e.g. Metcalf & Eddy, Wastewater Engineering, 5th ed.
 * 2014, ch. 7 [M for the chapter]): total SRT = (M_aeration + M_clarifier)/(Q_W·X_W + Q_e·X_e)
 * and aeration-only SRT = M_aeration/(Q_W·X_W + Q_e·X_e), in days. Unavailable when no solids
 * leave the system (SRT unbounded) or inputs are negative or not finite.
 */
export function srt(inp: SrtInputs): { total_d: Figure<number>; aeration_d: Figure<number> } {
  const vals = [inp.aerationMass_kg, inp.clarifierMass_kg, inp.wasFlow_m3h, inp.wasTss_gL, inp.effluentFlow_m3h, inp.effluentTss_gL];
  if (!vals.every((v) => Number.isFinite(v) && v >= 0)) {
    const u = unavailable<number>('masses, flows and concentrations must be finite and ≥ 0');
    return { total_d: u, aeration_d: u };
  }
  const loss = solidsLoss_kgh(inp);
  if (!(loss > 0)) {
    const u = unavailable<number>('no solids leave the system (Q_W·X_W + Q_e·X_e = 0): SRT is unbounded');
    return { total_d: u, aeration_d: u };
  }
  return { total_d: good((inp.aerationMass_kg + inp.clarifierMass_kg) / loss / 24), aeration_d: good(inp.aerationMass_kg / loss / 24) };
}

/**
 * WAS advisor (design §3 item 5, from the SRT definition solved for Q_W):
 * Q_W = (M/(SRT_target·24) − Q_e·X_e)/X_W [m³/h], M the inventory counted in the target SRT.
 * Unavailable with a reason when X_W ≤ 0 or when the effluent solids alone already remove more
 * than the target allows (Q_W would be negative).
 */
export function wasFlowForTargetSrt_m3h(mass_kg: number, targetSrt_d: number, effluentFlow_m3h: number, effluentTss_gL: number, wasTss_gL: number): Figure<number> {
  if (![mass_kg, targetSrt_d, effluentFlow_m3h, effluentTss_gL, wasTss_gL].every((v) => Number.isFinite(v) && v >= 0)) return unavailable('inputs must be finite and ≥ 0');
  if (!(targetSrt_d > 0)) return unavailable('target SRT must be positive');
  if (!(wasTss_gL > 0)) return unavailable('WAS TSS is zero: no waste flow can remove solids');
  const allowed = mass_kg / (targetSrt_d * 24);
  const qw = (allowed - effluentFlow_m3h * effluentTss_gL) / wasTss_gL;
  if (qw < 0) return unavailable(`effluent solids alone (${(effluentFlow_m3h * effluentTss_gL).toFixed(2)} kg/h) exceed the loss the target SRT allows (${allowed.toFixed(2)} kg/h): the target cannot be reached by wasting`);
  return good(qw);
}

/** A basin as the aerobic SRT weighs it. */
export interface AerobicBasin {
  volume_m3: number;
  mlss_gL: number;
  /** Aerated fraction of the volume, 0 … 1. */
  aeratedFraction: number;
}

/**
 * Aerobic share of the basin inventory on a mass basis, Σ(Vᵢ·Xᵢ·fᵢ)/Σ(Vᵢ·Xᵢ) with fᵢ the
 * aerated fraction of basin i: the aerobic SRT is the basin SRT × this share, i.e. the aerated
 * sludge mass over the solids removal rate (the usual definition of the aerobic SRT, e.g.
 * Metcalf & Eddy 5th ed. 2014, ch. 7 [M for the chapter]). Clarifier sludge is not aerated and is
 * not counted. Unavailable without basin mass or with a fraction outside 0–1.
 */
export function aerobicMassFraction(basins: readonly AerobicBasin[]): Figure<number> {
  if (basins.some((b) => !(b.aeratedFraction >= 0 && b.aeratedFraction <= 1))) return unavailable('aerated fraction must lie in 0 … 1');
  if (!basins.every((b) => Number.isFinite(b.volume_m3) && Number.isFinite(b.mlss_gL) && b.volume_m3 >= 0 && b.mlss_gL >= 0)) return unavailable('basin volumes and MLSS must be finite and ≥ 0');
  const mass = basins.reduce((a, b) => a + b.volume_m3 * b.mlss_gL, 0);
  if (!(mass > 0)) return unavailable('no sludge in the basins');
  return good(basins.reduce((a, b) => a + b.volume_m3 * b.mlss_gL * b.aeratedFraction, 0) / mass);
}

/** One time-series sample: epoch milliseconds, value (null for a missing/bad sample), optional quality. */
export interface TimedSample {
  ts_ms: number;
  value: number | null;
  quality?: Quality;
}
export type TimeSeries = readonly TimedSample[];

/**
 * One place where solids leave the system — typically one train: its waste stream Q_W·X_W and
 * its effluent stream Q_e·X_e, each as measured series.
 */
export interface SolidsOutlet {
  wasFlow_m3h: TimeSeries;
  wasTss_gL: TimeSeries;
  effluentFlow_m3h: TimeSeries;
  /**
   * Omitted when the effluent TSS is not measured: X_e is then taken as 0, which overstates the
   * SRT, and the result is estimated and says so.
   */
  effluentTss_gL?: TimeSeries;
}

export interface RollingSrtInputs {
  aerationMass_kg: TimeSeries;
  /** Optional: clarifier mass series; omitted means the aeration-only SRT equals the total. */
  clarifierMass_kg?: TimeSeries;
  /** Where solids leave (at least one); the loss is Σ (Q_W·X_W + Q_e·X_e) over the outlets. */
  outlets: readonly SolidsOutlet[];
  /** End of the window (epoch ms). */
  end_ms: number;
  /** Window length [h]; default 24. */
  window_h?: number;
  /** Largest gap between samples bridged by interpolation [h]; default 2. */
  maxGap_h?: number;
  /** Coverage below which the result is unavailable [-]; default 0.5. Below 0.95 it is estimated. */
  minCoverage?: number;
}

interface CleanSeries {
  t: number[];
  v: number[];
  estimated: number;
  dropped: number;
}

function clean(s: TimeSeries): CleanSeries {
  const ok = s
    .filter((p) => Number.isFinite(p.ts_ms) && p.value !== null && Number.isFinite(p.value) && p.quality !== 'unavailable')
    .slice()
    .sort((a, b) => a.ts_ms - b.ts_ms);
  return { t: ok.map((p) => p.ts_ms), v: ok.map((p) => p.value as number), estimated: ok.filter((p) => p.quality === 'estimated').length, dropped: s.length - ok.length };
}

/** Linear interpolation at t; null if t is outside the samples or in a gap wider than maxGap. */
function interp(s: CleanSeries, t: number, maxGap_ms: number): number | null {
  const { t: ts, v } = s;
  const n = ts.length;
  if (n === 0 || t < ts[0]! || t > ts[n - 1]!) return null;
  let lo = 0;
  let hi = n - 1;
  while (hi - lo > 1) {
    const mid = (lo + hi) >> 1;
    if (ts[mid]! <= t) lo = mid;
    else hi = mid;
  }
  if (ts[lo] === t) return v[lo]!;
  if (ts[hi] === t) return v[hi]!;
  if (ts[hi]! - ts[lo]! > maxGap_ms) return null;
  const f = (t - ts[lo]!) / (ts[hi]! - ts[lo]!);
  return v[lo]! + f * (v[hi]! - v[lo]!);
}

/**
 * Rolling SRT over a window (design §3 item 5): the wasting rate is the flow-weighted mean
 * (1/T)·∫Σ(Q_W·X_W + Q_e·X_e)dt over the outlets and the inventory the time-weighted mean mass
 * over the window, both by the trapezoidal rule on linearly interpolated series (union of sample
 * times); an interval counts where every series has a value at both ends. Samples that are null
 * or 'unavailable' are dropped; gaps wider than maxGap_h are not bridged; the result is
 * estimated when coverage < 95 %, any estimated sample was used or an outlet's effluent TSS is
 * not measured, and unavailable below minCoverage. Returns total and aeration-only SRT in days.
 */
export function rollingSrt(inp: RollingSrtInputs): { total_d: Figure<number>; aeration_d: Figure<number>; coverage: number } {
  const window_ms = (inp.window_h ?? 24) * 3_600_000;
  const maxGap_ms = (inp.maxGap_h ?? 2) * 3_600_000;
  const minCov = inp.minCoverage ?? 0.5;
  const start = inp.end_ms - window_ms;
  if (!(window_ms > 0) || !Number.isFinite(inp.end_ms)) {
    const u = unavailable<number>('window must be positive and end time finite');
    return { total_d: u, aeration_d: u, coverage: 0 };
  }
  if (inp.outlets.length === 0) {
    const u = unavailable<number>('no solids outlet given: the wasting rate is unknown');
    return { total_d: u, aeration_d: u, coverage: 0 };
  }
  const mass = clean(inp.aerationMass_kg);
  const outlets = inp.outlets.map((o) => ({
    qw: clean(o.wasFlow_m3h),
    xw: clean(o.wasTss_gL),
    qe: clean(o.effluentFlow_m3h),
    xe: o.effluentTss_gL ? clean(o.effluentTss_gL) : null,
  }));
  const series = [mass, ...outlets.flatMap((o) => [o.qw, o.xw, o.qe, ...(o.xe ? [o.xe] : [])])];
  const clar = inp.clarifierMass_kg ? clean(inp.clarifierMass_kg) : null;
  const grid = new Set<number>([start, inp.end_ms]);
  for (const s of [...series, ...(clar ? [clar] : [])]) for (const t of s.t) if (t > start && t < inp.end_ms) grid.add(t);
  const ts = [...grid].sort((a, b) => a - b);
  let lossInt = 0;
  let massInt = 0;
  let clarInt = 0;
  let covered = 0;
  let clarCovered = 0;
  const at = (t: number) => {
    const m = interp(mass, t, maxGap_ms);
    if (m === null) return null;
    let loss = 0;
    for (const o of outlets) {
      const qw = interp(o.qw, t, maxGap_ms);
      const xw = interp(o.xw, t, maxGap_ms);
      const qe = interp(o.qe, t, maxGap_ms);
      const xe = o.xe ? interp(o.xe, t, maxGap_ms) : 0;
      if (qw === null || xw === null || qe === null || xe === null) return null;
      loss += qw * xw + qe * xe;
    }
    return { m, loss };
  };
  for (let i = 0; i + 1 < ts.length; i++) {
    const a = ts[i]!;
    const b = ts[i + 1]!;
    const pa = at(a);
    const pb = at(b);
    if (!pa || !pb) continue;
    const dt_h = (b - a) / 3_600_000;
    lossInt += 0.5 * (pa.loss + pb.loss) * dt_h;
    massInt += 0.5 * (pa.m + pb.m) * dt_h;
    covered += b - a;
    if (clar) {
      const ca = interp(clar, a, maxGap_ms);
      const cb = interp(clar, b, maxGap_ms);
      if (ca !== null && cb !== null) {
        clarInt += 0.5 * (ca + cb) * dt_h;
        clarCovered += b - a;
      }
    }
  }
  const coverage = covered / window_ms;
  const reasons: string[] = [];
  const dropped = series.reduce((s, x) => s + x.dropped, 0) + (clar?.dropped ?? 0);
  const est = series.reduce((s, x) => s + x.estimated, 0) + (clar?.estimated ?? 0);
  if (dropped) reasons.push(`${dropped} missing or bad sample(s) dropped`);
  if (est) reasons.push(`${est} estimated sample(s) used`);
  if (coverage < minCov) {
    const u = unavailable<number>(`input series cover only ${(coverage * 100).toFixed(0)} % of the ${(window_ms / 3_600_000).toFixed(0)} h window`, ...reasons);
    return { total_d: u, aeration_d: u, coverage };
  }
  if (coverage < 0.95) reasons.push(`input series cover ${(coverage * 100).toFixed(0)} % of the window`);
  const covered_h = covered / 3_600_000;
  const meanLoss = lossInt / covered_h;
  const meanMass = massInt / covered_h;
  if (!(meanLoss > 0)) {
    const u = unavailable<number>('no solids left the system during the window: SRT is unbounded', ...reasons);
    return { total_d: u, aeration_d: u, coverage };
  }
  if (outlets.some((o) => o.xe === null)) reasons.push(EFFLUENT_TSS_NOT_MEASURED);
  let meanClar = 0;
  if (clar) {
    if (clarCovered / window_ms < minCov) reasons.push('clarifier mass series too sparse: total SRT counts aeration mass only');
    else meanClar = clarInt / (clarCovered / 3_600_000);
  }
  const mk = (v: number): Figure<number> => (reasons.length || est ? estimated(v, ...reasons) : good(v));
  return { total_d: mk((meanMass + meanClar) / meanLoss / 24), aeration_d: mk(meanMass / meanLoss / 24), coverage };
}

/** The reason carried by an SRT computed with an outlet whose effluent TSS is not measured. */
export const EFFLUENT_TSS_NOT_MEASURED = 'effluent TSS not measured in some train: effluent solids taken as 0 (SRT overstated)';

export interface DynamicSrtSample {
  ts_ms: number;
  /** Sludge inventory M [kg] (> 0). */
  mass_kg: number;
  /**
   * Solids removal rate W = Q_W·X_W + Q_e·X_e [kg/h]: what leaves by wasting and with the
   * effluent, at the mean age. Not the production: the production P = W + dM/dt follows from
   * the inventory's change, which the age balance accounts for itself.
   */
  removal_kgh: number;
}

/** Longest sub-step of the age-balance integration [h]; inputs are linear between samples. */
const AGE_STEP_H = 0.1;

/**
 * Dynamic SRT: the mass-weighted mean sludge age θ from the age balance
 * d(M·θ)/dt = M − W·θ — every kilogram in the inventory M ages one hour per hour, new sludge
 * enters at age 0, and sludge leaves by wasting and with the effluent (W) at the mean age θ.
 * Expanded, dθ/dt = 1 − θ·(W + dM/dt)/M, i.e. the production P = W + dM/dt drives the age, which
 * is why feeding the removal W where P belongs reads the age high while the inventory builds up.
 * The idea of a dynamic, age-balance SRT follows Takács et al. (2008), WEFTEC, "Do you know your
 * sludge age?" — the paper's exact formulation is recalled from memory [M]; the balance above
 * is written out here from its definition. M and W are taken linear between samples; the
 * balance is integrated in A = M·θ by the exponential midpoint rule (A → A·e^(−r·h) +
 * M·(1 − e^(−r·h))/r with r = W/M and M at the sub-step's midpoint, sub-steps ≤ 0.1 h), stable
 * for any step. Starts from θ0 (default the steady-state age M/W of the first sample, which
 * holds when the plant was steady before it). Returns θ in days at every sample.
 */
export function dynamicSrt(samples: readonly DynamicSrtSample[], theta0_d?: number): Figure<{ ts_ms: number; srt_d: number }[]> {
  const s = samples.filter((p) => [p.ts_ms, p.mass_kg, p.removal_kgh].every(Number.isFinite) && p.mass_kg > 0 && p.removal_kgh >= 0).slice().sort((a, b) => a.ts_ms - b.ts_ms);
  if (s.length === 0) return unavailable('no valid samples (inventory must be > 0, removal ≥ 0)');
  const first = s[0]!;
  let theta_h: number;
  if (theta0_d !== undefined) {
    if (!Number.isFinite(theta0_d) || theta0_d < 0) return unavailable('initial sludge age must be finite and ≥ 0');
    theta_h = theta0_d * 24;
  } else {
    if (!(first.removal_kgh > 0)) return unavailable('initial sludge age not given and the first sample has no steady-state age (no solids removed)');
    theta_h = first.mass_kg / first.removal_kgh;
  }
  let age = theta_h * first.mass_kg; // A = M·θ [kg·h]
  const out = [{ ts_ms: first.ts_ms, srt_d: theta_h / 24 }];
  for (let i = 1; i < s.length; i++) {
    const a = s[i - 1]!;
    const b = s[i]!;
    const dt_h = (b.ts_ms - a.ts_ms) / 3_600_000;
    const n = Math.max(1, Math.ceil(dt_h / AGE_STEP_H));
    const h = dt_h / n;
    for (let j = 0; j < n; j++) {
      const f = (j + 0.5) / n;
      const m = a.mass_kg + f * (b.mass_kg - a.mass_kg);
      const r = (a.removal_kgh + f * (b.removal_kgh - a.removal_kgh)) / m; // 1/h
      const rh = r * h;
      // (1 − e^(−rh))/r → h as r → 0; expm1 keeps the small-r case exact.
      const decay = Math.exp(-rh);
      const gain = rh > 1e-12 ? -Math.expm1(-rh) / r : h;
      age = age * decay + m * gain;
    }
    out.push({ ts_ms: b.ts_ms, srt_d: age / b.mass_kg / 24 });
  }
  const dropped = samples.length - s.length;
  return dropped ? estimated(out, `${dropped} invalid sample(s) ignored`) : good(out);
}
