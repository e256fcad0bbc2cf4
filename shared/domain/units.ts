/**
 * Units, one table for the whole product. Inside Flocstream every number is in the base unit of
 * its dimension (STYLE.md rule 2): flow m³/h, concentration g/L (= kg/m³), length m, mass kg,
 * time h, specific volume mL/g (SVI). A value arriving in another unit (a tag in L/s or mg/L) is
 * converted at the edge with the factor of its unit to that base unit. The lookup is per
 * dimension, so a unit of the wrong dimension (an MLSS tag in m) is refused, never scaled.
 *
 * Factors. The metric ones are exact by definition: SI prefixes and the units accepted for use
 * with the SI — litre = 1 dm³ = 10⁻³ m³, minute = 60 s, hour = 3600 s, day = 86 400 s (BIPM, The
 * International System of Units, 9th ed. 2019, §3 and Table 8; table number from memory [M]).
 * To add a unit (e.g. US customary units for display), add its symbol under its dimension with
 * the factor to the base unit taken from NIST SP 811 (Thompson & Taylor, Guide for the Use of the
 * International System of Units, 2008 ed.), Appendix B.8/B.9 — for instance gallon (US) =
 * 3.785 412 E−03 m³, foot = 3.048 E−01 m (exact), pound (avoirdupois) = 4.535 924 E−01 kg.
 */

export type Dimension = 'flow' | 'concentration' | 'length' | 'mass' | 'time' | 'specificVolume' | 'state';

export interface DimensionUnits {
  /** Symbol of the base unit everything of this dimension is held in. */
  base: string;
  /** Symbol → factor to the base unit (value in base unit = value × factor). */
  factors: Readonly<Record<string, number>>;
}

const L_PER_M3 = 1000;
const S_PER_H = 3600;
const H_PER_D = 24;

/** The units Flocstream understands, per dimension; both m3 and m³ spellings are accepted. */
export const UNITS: Readonly<Record<Dimension, DimensionUnits>> = Object.freeze({
  flow: {
    base: 'm3/h',
    // US gallon per minute: gallon (US) = 231 in³ = 231 × 0.0254³ m³ = 3.785 411 784 E−03 m³ exactly
    // (NIST SP 811, 2008 ed., Appendix B.9 lists it rounded as 3.785 412 E−03), × 60 min/h.
    factors: { 'm3/h': 1, 'm³/h': 1, 'm3/d': 1 / H_PER_D, 'm³/d': 1 / H_PER_D, 'm3/s': S_PER_H, 'm³/s': S_PER_H, 'L/s': S_PER_H / L_PER_M3, gpm: 231 * 0.0254 ** 3 * 60 },
  },
  concentration: {
    base: 'g/L',
    factors: { 'g/L': 1, 'kg/m3': 1, 'kg/m³': 1, 'mg/L': 1e-3, 'g/m3': 1e-3, 'g/m³': 1e-3 },
  },
  length: { base: 'm', factors: { m: 1, cm: 1e-2, mm: 1e-3 } },
  mass: { base: 'kg', factors: { kg: 1, g: 1e-3, t: 1e3 } },
  time: { base: 'h', factors: { ms: 1 / (S_PER_H * 1000), s: 1 / S_PER_H, min: 1 / 60, h: 1, d: H_PER_D } },
  // 1 mL/g = 10⁻⁶ m³ / 10⁻³ kg = 10⁻³ m³/kg, so 1 m³/kg = 1000 mL/g; 1 L/kg = 1 mL/g.
  specificVolume: { base: 'mL/g', factors: { 'mL/g': 1, 'L/kg': 1, 'm3/kg': 1e3, 'm³/kg': 1e3 } },
  // On/off and similar states carry no unit; 'state' is the tags' marker for them.
  state: { base: 'state', factors: { state: 1 } },
});

/** Factor from `unit` to the base unit of `dimension`, or null when the unit is not one of that dimension. */
export function unitFactor(dimension: Dimension, unit: string): number | null {
  const f = UNITS[dimension].factors[unit.trim()];
  return f === undefined ? null : f;
}

/** `value` in `unit` expressed in the base unit of `dimension`; null for a unit of another dimension. */
export function toBaseUnit(value: number, dimension: Dimension, unit: string): number | null {
  const f = unitFactor(dimension, unit);
  return f === null ? null : value * f;
}

/** `value` in the base unit of `dimension` expressed in `unit`; null for a unit of another dimension. */
export function fromBaseUnit(value: number, dimension: Dimension, unit: string): number | null {
  const f = unitFactor(dimension, unit);
  return f === null ? null : value / f;
}

/** Epoch milliseconds (or a duration in ms) → hours. */
export function ms_to_h(t_ms: number): number {
  return t_ms / (S_PER_H * 1000);
}

/** Sludge volume index mL/g → specific sludge volume m³/kg (1 mL/g = 10⁻³ m³/kg). */
export function sviMLg_to_m3kg(svi_mLg: number): number {
  return svi_mLg / UNITS.specificVolume.factors['m3/kg']!;
}

/**
 * Factor that turns a value in `from` into the same quantity in `to` (value_to = value × factor),
 * looked up in the one dimension holding both units; null when no dimension holds both (a flow
 * column for a concentration tag is refused, never scaled).
 */
export function conversionFactor(from: string, to: string): number | null {
  const a = from.trim();
  const b = to.trim();
  for (const d of Object.values(UNITS)) {
    const fa = d.factors[a];
    const fb = d.factors[b];
    if (fa !== undefined && fb !== undefined) return fa / fb;
  }
  return null;
}
