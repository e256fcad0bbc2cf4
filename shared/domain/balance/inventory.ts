/**
 * Sludge inventory of a plant (design §3 item 7): basin mass MLSS × volume, clarifier blanket
 * mass by shared/domain/clarifier-inventory.ts (with its side-water-depth check), the blanket
 * rise rate, the clarifier balance integral beside the blanket mass, and the plant totals.
 */
import { blanketConcentration_gL, blanketMass_kg, crossCheckClarifierInventory, type BlanketConcMethod, type ClarifierBalancePoint } from '../clarifier-inventory.js';
import { estimated, fromFigures, good, sumFigures, unavailable, type Figure } from '../quality.js';
import type { ClarifierLayout } from './inputs.js';
import { slopePerHour, type MinuteSeries } from './series.js';

/** Basin solids mass X·V [kg] from the basin MLSS [g/L = kg/m³] and volume [m³]. */
export function basinMass_kg(mlss: Figure<number>, volume_m3: number): Figure<number> {
  return fromFigures([mlss], (x) => x * volume_m3);
}

/** Volume-weighted train MLSS ΣXᵢVᵢ/ΣVᵢ [g/L] from the basin masses; unavailable if any basin's is. */
export function trainMlss_gL(basinMasses: readonly Figure<number>[], volume_m3: number, trainCode: string): Figure<number> {
  return fromFigures([sumFigures(basinMasses, `basins in ${trainCode}`)], (m) => m / volume_m3);
}

/** Total surface area of a clarifier entry: units × area of one [m²]. */
export function clarifierArea_m2(c: ClarifierLayout): number {
  return c.area_m2 * c.count;
}

export interface BlanketInputs {
  method: BlanketConcMethod;
  /** Feed MLSS X [g/L] (the train's). */
  mlss: Figure<number>;
  /** Underflow solids X_R [g/L]. */
  rasConc: Figure<number>;
  /** Blanket top above the floor [m]. */
  level: Figure<number>;
  clarifier: ClarifierLayout;
}

/**
 * Blanket concentration [g/L] and blanket mass [kg] of one clarifier entry with
 * blanketConcentration_gL / blanketMass_kg (shared/domain/clarifier-inventory.ts, design §3
 * item 7): level × total area × concentration; a level above the side-water depth is refused
 * as a detector fault.
 */
export function clarifierBlanket(inp: BlanketInputs): { conc_gL: Figure<number>; mass_kg: Figure<number> } {
  const { method, mlss, rasConc, level, clarifier: c } = inp;
  return {
    conc_gL: blanketConcentration_gL({ method, mlss_gL: mlss, rasConc_gL: rasConc }),
    mass_kg: blanketMass_kg({ method, mlss_gL: mlss, rasConc_gL: rasConc, blanketLevel_m: level, clarifierArea_m2: clarifierArea_m2(c), sideWaterDepth_m: c.sideWaterDepth_m }),
  };
}

/**
 * Blanket mass bucket by bucket [kg] ({@link clarifierBlanket}'s method per minute, for the
 * rolling SRT). Buckets where the mass is unavailable — a level above the side-water depth or
 * below zero — are left out, so the rolling SRT bridges or reports them instead of counting a
 * detector fault as sludge.
 */
export function blanketMassSeries(inp: { method: BlanketConcMethod; clarifier: ClarifierLayout; level: MinuteSeries; rasConc: MinuteSeries; mlss: MinuteSeries }): MinuteSeries {
  const out = new Map<number, number>();
  for (const [t, level] of inp.level) {
    const rasConc = inp.rasConc.get(t);
    const mlss = inp.mlss.get(t);
    if (rasConc === undefined || mlss === undefined) continue;
    const m = clarifierBlanket({ method: inp.method, mlss: good(mlss), rasConc: good(rasConc), level: good(level), clarifier: inp.clarifier }).mass_kg;
    if (m.value !== null) out.set(t, m.value);
  }
  return out;
}

/**
 * Blanket rise rate [m/h]: least-squares slope of the blanket level over the last `window_min`
 * minutes; unavailable with fewer than 3 buckets, estimated when they span less than half the window.
 */
export function blanketRate_m_h(levels: MinuteSeries, window_min: number, clarifierCode: string): Figure<number> {
  const slope = slopePerHour(levels);
  if (slope === null) return unavailable(`${clarifierCode}: fewer than 3 blanket-level minutes in the last ${window_min} min`);
  const ts = [...levels.keys()];
  const span = (Math.max(...ts) - Math.min(...ts)) / (window_min * 60_000);
  return span < 0.5 ? estimated(slope, `${clarifierCode}: blanket-level data cover only ${(span * 100).toFixed(0)} % of the rate window`) : good(slope);
}

/** Minute series of one single-clarifier train over the integral window, in base units. */
export interface ClarifierIntegralSeries {
  influentFlow_m3h: MinuteSeries;
  rasFlow_m3h: MinuteSeries;
  wasFlow_m3h: MinuteSeries;
  mlss_gL: MinuteSeries;
  rasConc_gL: MinuteSeries;
  effluentTss_gL: MinuteSeries;
  blanketLevel_m: MinuteSeries;
}

/**
 * Clarifier balance integral beside the blanket mass (design §3 item 7): the balance with
 * accumulation integrated over the window (crossCheckClarifierInventory) from the blanket mass
 * at the window start, and its discrepancy against the present blanket mass. Minutes lacking Q,
 * Q_R, Q_W, X or X_R are left out; a missing effluent TSS is taken as 0 (estimated, said so).
 * Only for a train with one clarifier entry: with several, the feed split is not measured.
 */
export function clarifierIntegral(
  s: ClarifierIntegralSeries,
  blanket: { method: BlanketConcMethod; clarifier: ClarifierLayout; massNow_kg: Figure<number> },
): { integratedMass_kg: Figure<number>; discrepancy_kg: Figure<number> } {
  const { clarifier: c, method } = blanket;
  const pts: ClarifierBalancePoint[] = [];
  for (const [t, q] of s.influentFlow_m3h) {
    const qr = s.rasFlow_m3h.get(t);
    const qw = s.wasFlow_m3h.get(t);
    const x = s.mlss_gL.get(t);
    const xr = s.rasConc_gL.get(t);
    if (qr === undefined || qw === undefined || x === undefined || xr === undefined) continue;
    const xe = s.effluentTss_gL.get(t);
    pts.push({
      t_ms: t,
      influentFlow_m3h: q,
      rasFlow_m3h: qr,
      wasFlow_m3h: qw,
      mlss_gL: x,
      rasConc_gL: xr,
      effluentTss_gL: xe ?? 0,
      ...(xe === undefined ? { quality: 'estimated' as const, reasons: [`${c.code}: effluent TSS missing in some minutes, taken as 0`] } : {}),
    });
  }
  pts.sort((a, b) => a.t_ms - b.t_ms);
  const first = pts[0];
  const level0 = first ? s.blanketLevel_m.get(first.t_ms) : undefined;
  const m0 =
    first && level0 !== undefined
      ? clarifierBlanket({ method, mlss: good(first.mlss_gL), rasConc: good(first.rasConc_gL), level: good(level0), clarifier: c }).mass_kg
      : unavailable<number>(`${c.code}: no blanket level at the start of the integral window`);
  const cc = crossCheckClarifierInventory(pts, m0, blanket.massNow_kg);
  return { integratedMass_kg: cc.integratedMass_kg, discrepancy_kg: cc.discrepancy_kg };
}

/** Plant inventory [kg]: aeration, clarifiers, total, and the fraction stored in the clarifiers. */
export function inventoryTotals(basinMasses: readonly Figure<number>[], clarifierMasses: readonly Figure<number>[]) {
  const aerationMass_kg = sumFigures(basinMasses, 'basins');
  const clarifierMass_kg = sumFigures(clarifierMasses, 'clarifiers');
  const totalMass_kg = fromFigures([aerationMass_kg, clarifierMass_kg], (a, c) => a + c);
  const storedFraction = fromFigures([clarifierMass_kg, totalMass_kg], (c, m) => (m > 0 ? c / m : unavailable('inventory is zero')));
  return { aerationMass_kg, clarifierMass_kg, totalMass_kg, storedFraction };
}
