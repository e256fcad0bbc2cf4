/**
 * Storm projection (design §3 item 4): with the return flow capped, a storm flow pushes the
 * aeration-tank MLSS down to a new equilibrium and moves sludge into the clarifiers. The
 * projection is a steady-state clarifier balance; the checks are rules of thumb of the trade.
 */
import { rasConcMaxRuleOfThumb_gL } from './flux.js';
import { good, unavailable, type Figure } from './quality.js';
import { sviMLg_to_m3kg } from './units.js';

export interface StormCheckSettings {
  /** Lowest acceptable basin MLSS during storm storage [g/L]; default 2 (common practice of the trade). */
  minMlss_gL: number;
  /** Highest acceptable fraction of the inventory stored in the clarifiers [-]; default 0.30 (common practice). */
  maxStoredFraction: number;
  /** Highest acceptable blanket rise [m]; default 0.3 (common practice of the trade). */
  maxBlanketRise_m: number;
}

/** Defaults of the storm checks — rules of thumb, common practice of the trade (REFERENCES.md [CP]). */
export const DEFAULT_STORM_CHECKS: StormCheckSettings = Object.freeze({ minMlss_gL: 2, maxStoredFraction: 0.3, maxBlanketRise_m: 0.3 });

export type StormRule = 'min-mlss' | 'max-stored-fraction' | 'max-blanket-rise';

export interface StormCheck {
  rule: StormRule;
  ok: boolean;
  value: number;
  limit: number;
}

export interface StormInputs {
  influentFlow_m3h: number;
  rasFlow_m3h: number;
  mlss_gL: number;
  svi_mLg: number;
  aerationVolume_m3: number;
  clarifierArea_m2: number;
  stormFlow_m3h: number;
  /** Rule-of-thumb factor for X_R,max = factor/SVI; default 1200. */
  xrFactor?: number;
  /** Sludge already held in the clarifiers before the storm [kg]; default 0. */
  clarifierMass_kg?: number;
  /** Cap on the return flow during the storm [m³/h]; default: the present return flow. */
  rasFlowCap_m3h?: number;
  checks?: Partial<StormCheckSettings>;
}

export interface StormProjection {
  /** Return flow used during the storm, min(Q_R, cap) [m³/h]. */
  stormRasFlow_m3h: number;
  /** X_R,max = factor/SVI [g/L]. */
  rasConcMax_gL: number;
  /** New equilibrium MLSS X' = min(X, X_R,max·Q_R/(Q_storm + Q_R)) [g/L]. */
  equilibriumMlss_gL: number;
  /** Sludge moved to the clarifiers (X − X')·V [kg]. */
  sludgeToClarifiers_kg: number;
  /** Clarifier mass after the storm: existing + moved [kg]. */
  clarifierMassAfter_kg: number;
  /** Blanket volume of the moved sludge, mass·SVI [m³]. */
  blanketVolume_m3: number;
  /** Blanket rise = blanket volume / clarifier area [m]. */
  blanketRise_m: number;
  /** Clarifier mass after / total inventory (X·V + existing clarifier mass) [-]. */
  storedFraction: number;
  checks: StormCheck[];
}

/**
 * Storm projection (design §3 item 4; steady-state clarifier balance with X_R at its rule-of-
 * thumb maximum factor/SVI, common practice of the trade): X' = X_R,max·Q_R/(Q_storm + Q_R)
 * with Q_R capped (never above the present MLSS: no sludge returns if the clarifier can hold
 * the storm); mass moved (X − X')·V; blanket volume = mass·SVI·1e-3 m³/kg; rise = volume/area;
 * stored fraction = (existing + moved clarifier mass)/(X·V + existing). Checks: MLSS ≥ 2 g/L,
 * stored fraction ≤ 0.30, rise ≤ 0.3 m by default (settings). Unavailable for invalid inputs.
 */
export function stormProjection(inp: StormInputs): Figure<StormProjection> {
  const { influentFlow_m3h: q, rasFlow_m3h: qr, mlss_gL: x, svi_mLg: svi, aerationVolume_m3: v, clarifierArea_m2: a, stormFlow_m3h: qs } = inp;
  const m0 = inp.clarifierMass_kg ?? 0;
  const nums = [q, qr, x, svi, v, a, qs, m0];
  if (!nums.every((n) => Number.isFinite(n) && n >= 0)) return unavailable('inputs must be finite and ≥ 0');
  if (!(a > 0)) return unavailable('clarifier area must be positive');
  if (!(svi > 0)) return unavailable('SVI must be positive');
  const xrMax = rasConcMaxRuleOfThumb_gL(svi, inp.xrFactor ?? 1200);
  if (xrMax.value === null) return unavailable(...xrMax.reasons);
  const cap = inp.rasFlowCap_m3h ?? qr;
  if (!Number.isFinite(cap) || cap < 0) return unavailable('return flow cap must be finite and ≥ 0');
  const qrs = Math.min(qr, cap);
  const denom = qs + qrs;
  // No flow at all: nothing is pushed out of the basin.
  const xEq = denom > 0 ? Math.min(x, (xrMax.value * qrs) / denom) : x;
  const moved = Math.max(0, x - xEq) * v;
  const after = m0 + moved;
  const blanketVolume = moved * sviMLg_to_m3kg(svi);
  const rise = blanketVolume / a;
  const inventory = x * v + m0;
  const stored = inventory > 0 ? after / inventory : 0;
  const s: StormCheckSettings = { ...DEFAULT_STORM_CHECKS, ...inp.checks };
  const checks: StormCheck[] = [
    { rule: 'min-mlss', ok: xEq >= s.minMlss_gL, value: xEq, limit: s.minMlss_gL },
    { rule: 'max-stored-fraction', ok: stored <= s.maxStoredFraction, value: stored, limit: s.maxStoredFraction },
    { rule: 'max-blanket-rise', ok: rise <= s.maxBlanketRise_m, value: rise, limit: s.maxBlanketRise_m },
  ];
  return good({
    stormRasFlow_m3h: qrs,
    rasConcMax_gL: xrMax.value,
    equilibriumMlss_gL: xEq,
    sludgeToClarifiers_kg: moved,
    clarifierMassAfter_kg: after,
    blanketVolume_m3: blanketVolume,
    blanketRise_m: rise,
    storedFraction: stored,
    checks,
  });
}
