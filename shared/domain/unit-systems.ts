/**
 * Display conversions between SI (what Flocstream stores and the API speaks) and US customary
 * units (what a plant with `unitSystem: 'US'` reads on the monitor and in CSV exports).
 *
 * Exact definitions (NIST Special Publication 811, 2008 edition, Appendix B.8 and B.9; NIST
 * Handbook 44, Appendix C; both follow the international yard and pound agreement of 1959):
 *   1 ft  = 0.3048 m exactly
 *   1 gal (US liquid) = 231 in³ = 3.785 411 784 L exactly
 *   1 lb (avoirdupois) = 0.453 592 37 kg exactly
 * Derived here, not rounded: ft² = 0.3048² m², MGD = 10⁶ gal / 24 h, gpm = gal / min.
 * Concentrations stay mg/L in both systems (common practice in US plant reporting); g/L is shown
 * as mg/L × 1000 for a US plant.
 */

import type { UnitSystem } from '../contracts/plant-model.ts';

export const M_PER_FT = 0.3048;
export const L_PER_GAL = 3.785411784;
export const KG_PER_LB = 0.45359237;
export const M3_PER_GAL = L_PER_GAL / 1000;

/** One display unit: its symbol and the factor from the SI quantity (display = SI × factor). */
export interface DisplayUnit {
  unit: string;
  fromSi: (si: number) => number;
  toSi: (shown: number) => number;
}

const linear = (unit: string, perSi: number): DisplayUnit => ({ unit, fromSi: (v) => v * perSi, toSi: (v) => v / perSi });

/** Flow: m³/h → MGD (10⁶ US gal per day) or gpm (US gal per minute). */
export const GPM_PER_M3H = 1 / M3_PER_GAL / 60;
export const MGD_PER_M3H = (24 / M3_PER_GAL) / 1e6;
export const FT_PER_M = 1 / M_PER_FT;
export const FT2_PER_M2 = 1 / (M_PER_FT * M_PER_FT);
export const FT3_PER_M3 = 1 / (M_PER_FT * M_PER_FT * M_PER_FT);
export const LB_PER_KG = 1 / KG_PER_LB;

/** Quantities the monitor and the exports show; each has one SI unit (the field suffix). */
export type Quantity = 'flow_m3h' | 'flowLarge_m3h' | 'length_m' | 'area_m2' | 'volume_m3' | 'mass_kg' | 'conc_gL' | 'conc_mgL';

const SI: Record<Quantity, DisplayUnit> = {
  flow_m3h: linear('m³/h', 1),
  flowLarge_m3h: linear('m³/h', 1),
  length_m: linear('m', 1),
  area_m2: linear('m²', 1),
  volume_m3: linear('m³', 1),
  mass_kg: linear('kg', 1),
  conc_gL: linear('g/L', 1),
  conc_mgL: linear('mg/L', 1),
};

const US: Record<Quantity, DisplayUnit> = {
  // Pump and basin flows in gpm; plant and train flows in MGD (common practice).
  flow_m3h: linear('gpm', GPM_PER_M3H),
  flowLarge_m3h: linear('MGD', MGD_PER_M3H),
  length_m: linear('ft', FT_PER_M),
  area_m2: linear('ft²', FT2_PER_M2),
  // Basin volumes in million gallons (MG) are the US plant habit.
  volume_m3: linear('MG', 1 / M3_PER_GAL / 1e6),
  mass_kg: linear('lb', LB_PER_KG),
  conc_gL: linear('mg/L', 1000),
  conc_mgL: linear('mg/L', 1),
};

/**
 * The display unit of a quantity in a unit system. `fromSi` converts a stored SI value for
 * display, `toSi` converts what a form accepted back to SI.
 */
export function displayUnit(system: UnitSystem, q: Quantity): DisplayUnit {
  return (system === 'US' ? US : SI)[q];
}

/**
 * Which quantity an SI unit string names (as in tag units and field suffixes), or null when the
 * unit has no US counterpart (then it is shown as stored).
 */
export function quantityOfSiUnit(unit: string): Quantity | null {
  switch (unit.replace('³', '3').replace('²', '2').trim()) {
    case 'm3/h':
      return 'flow_m3h';
    case 'm':
      return 'length_m';
    case 'm2':
      return 'area_m2';
    case 'm3':
      return 'volume_m3';
    case 'kg':
      return 'mass_kg';
    case 'g/L':
      return 'conc_gL';
    case 'mg/L':
      return 'conc_mgL';
    default:
      return null;
  }
}

/**
 * Which quantity a field name carries by its SI suffix (`flow_m3h`, `mass_kg`), or null.
 * Plant-scale flows (influent, effluent, plant and train totals) use `flowLarge_m3h`.
 */
export function quantityOfField(field: string): Quantity | null {
  const m = /_(m3h|m3|m2|m|kg|gL|mgL)$/.exec(field);
  if (!m) return null;
  switch (m[1]) {
    case 'm3h':
      return /influent|effluent|plant|train|peak/i.test(field) ? 'flowLarge_m3h' : 'flow_m3h';
    case 'm3':
      return 'volume_m3';
    case 'm2':
      return 'area_m2';
    case 'm':
      return 'length_m';
    case 'kg':
      return 'mass_kg';
    case 'gL':
      return 'conc_gL';
    default:
      return 'conc_mgL';
  }
}
