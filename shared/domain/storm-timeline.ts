/**
 * Storm projection in time (design §3 item 4, extended): how the sludge moves from the aeration
 * basins into the clarifiers hour by hour while a storm hydrograph passes, and where the blanket
 * stands against the clarifier's depth. The equilibrium projection (storm.ts) is where this
 * settles when the storm lasts; a short storm moves only part of that mass.
 */
import { rasConcMaxRuleOfThumb_gL } from './flux.js';
import { estimated, good, unavailable, type Figure } from './quality.js';
import { DEFAULT_STORM_CHECKS, type StormCheckSettings, type StormInputs } from './storm.js';
import { sviMLg_to_m3kg } from './units.js';

export interface HydrographPoint {
  t_h: number;
  flow_m3h: number;
}

/**
 * The equilibrium projection's inputs (./storm.ts) with the storm as a hydrograph instead of one
 * flow; the return flow is held through the storm (no cap), and the basin and clarifier are taken
 * as steady at the influent flow before it.
 */
export interface StormTimelineInputs extends Omit<StormInputs, 'stormFlow_m3h' | 'rasFlowCap_m3h'> {
  /** Influent flow in time, linear between points; two points at the same time make a step. */
  hydrograph: readonly HydrographPoint[];
  /** Side-water depth of the clarifiers [m]: a blanket there is at the surface. */
  clarifierDepth_m: number;
  /** Blanket level before the storm [m above the floor]; 0 when not given (said so). */
  blanketNow_m?: number;
  /** X_R,max to use instead of the rule, e.g. the lower of the rule and flux theory [g/L]. */
  rasConcMax_gL?: number;
}

export type StormTimelineRule = 'min-mlss' | 'max-stored-fraction' | 'max-blanket-rise' | 'blanket-below-surface';

export interface StormTimelineCheck {
  rule: StormTimelineRule;
  ok: boolean;
  /** Worst value over the storm (lowest MLSS, highest stored fraction, rise, blanket level). */
  value: number;
  limit: number;
  /** First time the rule failed [h], null if it held throughout. */
  firstFailed_h: number | null;
}

export interface StormTimelinePoint {
  t_h: number;
  mlss_gL: number;
  clarifierMass_kg: number;
  blanket_m: number;
  /** X·(Q + Q_R)/Q_R at that time [g/L]; null without return flow. */
  rasConcRequired_gL: number | null;
}

export interface StormTimeline {
  points: StormTimelinePoint[];
  rasConcMax_gL: number;
  peakBlanket_m: number;
  /** First time the blanket reaches the clarifier's depth [h], null if never. */
  blanketReachesSurface_h: number | null;
  /** First time any check failed [h], null if none did. */
  firstFailure_h: number | null;
  checks: StormTimelineCheck[];
}

/** Flow of a piecewise-linear hydrograph at t (a repeated time is a step: the later point wins from then on). */
export function hydrographFlowAt(h: readonly HydrographPoint[], t: number): number {
  if (t <= h[0]!.t_h) return h[0]!.flow_m3h;
  let i = 0;
  while (i + 1 < h.length && h[i + 1]!.t_h <= t) i++;
  const a = h[i]!;
  const b = h[i + 1];
  if (!b) return a.flow_m3h;
  return a.flow_m3h + ((t - a.t_h) / (b.t_h - a.t_h)) * (b.flow_m3h - a.flow_m3h);
}

/** Largest integration step [h]; the basin's time constant τ = V/(Q+Q_R) is hours, so this is fine. */
const STEP_H = 0.01;

/**
 * Storm timeline: the aeration basins as one completely mixed tank, V·dX/dt = F_R − (Q + Q_R)·X,
 * and the clarifiers holding the rest of a constant inventory X₀·V + M_c₀ (over a storm of hours
 * growth, wasting and effluent solids are neglected, said so). The clarifier returns what it gets,
 * F_R = (Q + Q_R)·X, up to its capacity X_R,max·Q_R (the return flow held); sludge it cannot
 * return is stored, and stored sludge goes back at X_R,max·Q_R once the flow falls. In the capped
 * regime X relaxes toward X_R,max·Q_R/(Q + Q_R) — the equilibrium projection (storm.ts) — with the
 * time constant τ = V/(Q + Q_R), integrated exactly over steps of 0.01 h with Q at the step's
 * midpoint. Blanket = blanket before + stored mass·SVI·1e-3/A (storm.ts's blanket volume). Checks,
 * each with the first time it failed: the storm-storage rules of thumb [CP] (MLSS ≥ 2 g/L, stored
 * fraction ≤ 0.30, rise ≤ 0.3 m by default) and the blanket below the clarifier's surface; a
 * blanket at the surface is a failure and makes the result estimated (from then on sludge leaves
 * with the effluent, which the projection does not follow), never good.
 */
export function stormTimeline(inp: StormTimelineInputs): Figure<StormTimeline> {
  const { influentFlow_m3h: q0, rasFlow_m3h: qr, mlss_gL: x0, svi_mLg: svi, aerationVolume_m3: v, clarifierArea_m2: a, clarifierDepth_m: depth } = inp;
  const m0 = inp.clarifierMass_kg ?? 0;
  const b0 = inp.blanketNow_m ?? 0;
  if (![q0, qr, x0, svi, v, a, depth, m0, b0].every((n) => Number.isFinite(n) && n >= 0)) return unavailable('inputs must be finite and ≥ 0');
  if (!(a > 0) || !(v > 0) || !(depth > 0)) return unavailable('clarifier area and depth and aeration volume must be positive');
  const h = inp.hydrograph;
  if (h.length < 2) return unavailable('the hydrograph needs at least two points');
  for (let i = 0; i < h.length; i++) {
    if (!Number.isFinite(h[i]!.t_h) || !Number.isFinite(h[i]!.flow_m3h) || h[i]!.flow_m3h < 0) return unavailable('hydrograph times and flows must be finite, flows ≥ 0');
    if (i > 0 && h[i]!.t_h < h[i - 1]!.t_h) return unavailable('hydrograph times must not decrease');
  }
  const t0 = h[0]!.t_h;
  const tEnd = h[h.length - 1]!.t_h;
  if (!(tEnd > t0)) return unavailable('the hydrograph must span some time');
  const rule = rasConcMaxRuleOfThumb_gL(svi, inp.xrFactor ?? 1200);
  const xrMax = inp.rasConcMax_gL ?? rule.value;
  if (xrMax === null || !(xrMax > 0) || !Number.isFinite(xrMax)) return unavailable(...(rule.value === null ? rule.reasons : ['X_R,max must be positive']));
  const s: StormCheckSettings = { ...DEFAULT_STORM_CHECKS, ...inp.checks };
  const sviM3kg = sviMLg_to_m3kg(svi);
  const total = x0 * v + m0;
  const cap = xrMax * qr;

  // Points at the hydrograph's own times and on a regular grid (≤ about 400 points).
  const outStep = Math.max(0.25, (tEnd - t0) / 400);
  const outTimes = new Set<number>(h.map((p) => p.t_h));
  for (let t = t0; t < tEnd; t += outStep) outTimes.add(t);
  const outs = [...outTimes].sort((p, r) => p - r);

  let x = x0;
  let t = t0;
  const points: StormTimelinePoint[] = [];
  const state = (tt: number) => {
    const mc = total - x * v;
    return { t_h: tt, mlss_gL: x, clarifierMass_kg: mc, blanket_m: b0 + Math.max(0, mc - m0) * sviM3kg / a, rasConcRequired_gL: qr > 0 ? (x * (hydrographFlowAt(h, tt) + qr)) / qr : null };
  };
  // Worst values and first failure of each check, followed on every step.
  const worst = { minX: x0, maxStored: total > 0 ? m0 / total : 0, maxRise: 0, maxBlanket: b0 };
  const first: Record<StormTimelineRule, number | null> = { 'min-mlss': null, 'max-stored-fraction': null, 'max-blanket-rise': null, 'blanket-below-surface': null };
  const follow = (tt: number) => {
    const st = state(tt);
    const stored = total > 0 ? st.clarifierMass_kg / total : 0;
    const rise = st.blanket_m - b0;
    worst.minX = Math.min(worst.minX, st.mlss_gL);
    worst.maxStored = Math.max(worst.maxStored, stored);
    worst.maxRise = Math.max(worst.maxRise, rise);
    worst.maxBlanket = Math.max(worst.maxBlanket, st.blanket_m);
    if (first['min-mlss'] === null && st.mlss_gL < s.minMlss_gL) first['min-mlss'] = tt;
    if (first['max-stored-fraction'] === null && stored > s.maxStoredFraction) first['max-stored-fraction'] = tt;
    if (first['max-blanket-rise'] === null && rise > s.maxBlanketRise_m) first['max-blanket-rise'] = tt;
    if (first['blanket-below-surface'] === null && st.blanket_m >= depth) first['blanket-below-surface'] = tt;
  };
  follow(t0);
  for (const target of outs) {
    while (t < target - 1e-12) {
      const dt = Math.min(STEP_H, target - t);
      const q = hydrographFlowAt(h, t + dt / 2);
      const through = q + qr;
      const stored = total - x * v - m0;
      // Returned solids: all that arrives, up to the capacity; stored sludge goes back at capacity.
      const capped = stored > 1e-9 || through * x > cap;
      if (capped && through > 0) {
        const xEq = cap / through;
        let next = xEq + (x - xEq) * Math.exp((-dt * through) / v);
        // Returning stored sludge cannot take the basin above what the inventory holds.
        if (next * v > total - m0) next = (total - m0) / v;
        x = next;
      }
      t += dt;
      follow(t);
    }
    points.push(state(target));
  }
  const checks: StormTimelineCheck[] = [
    { rule: 'min-mlss', ok: first['min-mlss'] === null, value: worst.minX, limit: s.minMlss_gL, firstFailed_h: first['min-mlss'] },
    { rule: 'max-stored-fraction', ok: first['max-stored-fraction'] === null, value: worst.maxStored, limit: s.maxStoredFraction, firstFailed_h: first['max-stored-fraction'] },
    { rule: 'max-blanket-rise', ok: first['max-blanket-rise'] === null, value: worst.maxRise, limit: s.maxBlanketRise_m, firstFailed_h: first['max-blanket-rise'] },
    { rule: 'blanket-below-surface', ok: first['blanket-below-surface'] === null, value: worst.maxBlanket, limit: depth, firstFailed_h: first['blanket-below-surface'] },
  ];
  const failures = checks.flatMap((c) => (c.firstFailed_h === null ? [] : [c.firstFailed_h]));
  const surface = first['blanket-below-surface'];
  const value: StormTimeline = {
    points: points.map((p) => ({ ...p, blanket_m: Math.min(p.blanket_m, depth) })),
    rasConcMax_gL: xrMax,
    peakBlanket_m: Math.min(worst.maxBlanket, depth),
    blanketReachesSurface_h: surface,
    firstFailure_h: failures.length ? Math.min(...failures) : null,
    checks,
  };
  const reasons = ['over the storm growth, wasting and effluent solids are neglected (inventory held constant)'];
  if (inp.blanketNow_m === undefined) reasons.push('blanket level before the storm not given: taken as 0 m (only the rise is known)');
  if (qr === 0) reasons.push('no return flow: required return concentration undefined (null)');
  if (surface !== null) reasons.push(`the blanket reaches the clarifier surface (${depth} m) at ${surface.toFixed(2)} h: sludge is lost with the effluent from then on; the levels shown are capped at the surface and the storage after it is overstated`);
  // A blanket at the surface, or one whose starting level is unknown, is never a good figure.
  return surface !== null || inp.blanketNow_m === undefined ? estimated(value, ...reasons) : good(value, reasons);
}
