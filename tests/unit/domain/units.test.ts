import { describe, expect, it } from 'vitest';
import { fromBaseUnit, ms_to_h, sviMLg_to_m3kg, toBaseUnit, unitFactor, UNITS } from '../../../shared/domain/units.js';

// Metric factors follow from the definitions of the SI prefixes and of the litre, minute, hour and
// day (BIPM SI Brochure, 9th ed. 2019); each expectation is worked out beside it.
describe('one unit table, per dimension', () => {
  it('flow: 1 L/s = 10⁻³ m³ × 3600 s/h = 3.6 m³/h; 1 m³/d = 1/24 m³/h; 1 m³/s = 3600 m³/h', () => {
    expect(unitFactor('flow', 'L/s')).toBeCloseTo(3.6, 12);
    expect(unitFactor('flow', 'm3/d')).toBeCloseTo(1 / 24, 15);
    expect(unitFactor('flow', 'm³/d')).toBe(unitFactor('flow', 'm3/d'));
    expect(unitFactor('flow', 'm3/s')).toBe(3600);
    // Metcalf & Eddy 5th ed. Example 8-3 flow: 22 700 m³/d / 24 = 945.833 m³/h
    expect(toBaseUnit(22_700, 'flow', 'm3/d')).toBeCloseTo(945.8333, 4);
  });
  it('concentration: 1 mg/L = 1 g/m³ = 10⁻³ g/L; 1 kg/m³ = 1 g/L', () => {
    expect(unitFactor('concentration', 'mg/L')).toBe(1e-3);
    expect(unitFactor('concentration', 'g/m3')).toBe(1e-3);
    expect(unitFactor('concentration', 'kg/m³')).toBe(1);
    expect(toBaseUnit(10, 'concentration', 'mg/L')).toBeCloseTo(0.01, 15);
  });
  it('length, time and specific volume', () => {
    expect(toBaseUnit(150, 'length', 'cm')).toBeCloseTo(1.5, 12);
    expect(ms_to_h(5_400_000)).toBe(1.5); // 5 400 000 ms / 3 600 000 ms/h
    expect(toBaseUnit(2, 'time', 'd')).toBe(48);
    // SVI 120 mL/g = 120 × 10⁻⁶ m³ / 10⁻³ kg = 0.120 m³/kg
    expect(sviMLg_to_m3kg(120)).toBeCloseTo(0.12, 15);
    expect(fromBaseUnit(120, 'specificVolume', 'm3/kg')).toBeCloseTo(0.12, 15);
  });
  it('a unit of another dimension or an unknown symbol is refused, not scaled', () => {
    expect(unitFactor('concentration', 'm')).toBeNull();
    expect(unitFactor('length', 'mg/L')).toBeNull();
    expect(unitFactor('flow', 'furlong/fortnight')).toBeNull();
    expect(unitFactor('concentration', 'gpm')).toBeNull();
    expect(toBaseUnit(3, 'concentration', 'm3/h')).toBeNull();
    expect(unitFactor('flow', ' m3/h ')).toBe(1); // surrounding blanks of a typed tag unit are ignored
  });
  it('US gallon per minute: 231 in³ × 0.0254³ m³/in³ × 60 min/h = 0.227 124 707 04 m³/h (NIST SP 811 App. B.9; NIST Handbook 44 App. C)', () => {
    expect(unitFactor('flow', 'gpm')).toBeCloseTo(0.22712470704, 12);
  });
  it('every base unit converts with factor 1, and to and from the base unit are inverse', () => {
    for (const d of Object.values(UNITS)) expect(d.factors[d.base]).toBe(1);
    expect(fromBaseUnit(toBaseUnit(7.5, 'flow', 'L/s')!, 'flow', 'L/s')).toBeCloseTo(7.5, 12);
  });
});
