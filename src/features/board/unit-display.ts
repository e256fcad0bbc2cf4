import { createContext, useContext } from 'react';
import type { UnitSystem } from '../../../shared/contracts/plant-model.ts';
import { displayUnit, quantityOfSiUnit } from '../../../shared/domain/unit-systems.ts';

/**
 * A balance figure as the plant reads it: the API speaks SI, a US plant sees MGD, ft, ft², lb
 * and mg/L (shared/domain/unit-systems.ts, NIST SP 811 factors). Board flows are plant and train
 * scale (influent, RAS, WAS beside each other), so m³/h shows as MGD, not gpm. Units without a
 * US counterpart (d, %, mL/g, m/h rates) are shown as they come.
 */
export function boardFigure(system: UnitSystem, value: number | null, unit: string): { value: number | null; unit: string } {
  let q = quantityOfSiUnit(unit);
  if (q === null) return { value, unit };
  if (q === 'flow_m3h') q = 'flowLarge_m3h';
  const d = displayUnit(system, q);
  return { value: value === null ? null : d.fromSi(value), unit: system === 'SI' ? unit : d.unit };
}

/** The unit system of the plant the board shows (SI until the plant list has answered). */
export const UnitSystemContext = createContext<UnitSystem>('SI');

export function useUnitSystem(): UnitSystem {
  return useContext(UnitSystemContext);
}
