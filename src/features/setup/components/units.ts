import type { UnitSystem } from '../../../../shared/contracts/plant-model.ts';
import { displayUnit, type Quantity } from '../../../../shared/domain/unit-systems.ts';

/** A geometry field of a unit: stored SI (its name carries the unit), shown and typed in the plant's unit system. */
export interface GeomField {
  name: string;
  label: string;
  quantity: Quantity | null;
  optional?: boolean;
  integer?: boolean;
}

export const BASIN_FIELDS: GeomField[] = [
  { name: 'volume_m3', label: 'Volume', quantity: 'volume_m3' },
  { name: 'aeratedFraction', label: 'Aerated fraction', quantity: null },
  { name: 'sideWaterDepth_m', label: 'Side water depth', quantity: 'length_m', optional: true },
];
export const CLARIFIER_FIELDS: GeomField[] = [
  { name: 'area_m2', label: 'Area (each)', quantity: 'area_m2' },
  { name: 'sideWaterDepth_m', label: 'Side water depth', quantity: 'length_m' },
  { name: 'feedDepth_m', label: 'Feed depth', quantity: 'length_m', optional: true },
  { name: 'count', label: 'Count', quantity: null, integer: true },
];
export const PUMP_FIELDS: GeomField[] = [{ name: 'capacity_m3h', label: 'Capacity', quantity: 'flow_m3h' }];

export function unitLabel(system: UnitSystem, f: GeomField): string | undefined {
  return f.quantity ? displayUnit(system, f.quantity).unit : undefined;
}

/** A stored SI value as shown (rounded to what a person reads: 4 significant digits, integers kept). */
export function show(system: UnitSystem, q: Quantity | null, si: number | null | undefined): string {
  if (si === null || si === undefined) return '';
  const v = q ? displayUnit(system, q).fromSi(si) : si;
  return Number.isInteger(v) ? String(v) : String(Number(v.toPrecision(4)));
}

/** A typed number in display units back to SI (left as it is when it is not a number, for the schema to refuse). */
export function toSi(system: UnitSystem, q: Quantity | null, typed: number | string | undefined): number | string | undefined {
  return typeof typed === 'number' && q ? displayUnit(system, q).toSi(typed) : typed;
}

/** `datetime-local` text of a time in the browser's zone (the input has no zone). */
export function localInput(d: Date): string {
  const p = (n: number) => String(n).padStart(2, '0');
  return `${d.getFullYear()}-${p(d.getMonth() + 1)}-${p(d.getDate())}T${p(d.getHours())}:${p(d.getMinutes())}`;
}
