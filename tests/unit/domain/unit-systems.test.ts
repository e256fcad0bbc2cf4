import { describe, expect, it } from 'vitest';
import { displayUnit, FT2_PER_M2, GPM_PER_M3H, KG_PER_LB, L_PER_GAL, M_PER_FT, MGD_PER_M3H, quantityOfField, quantityOfSiUnit } from '../../../shared/domain/unit-systems.ts';

/**
 * Display conversions against the published exact definitions: NIST Special Publication 811
 * (2008), Appendix B.8/B.9, and NIST Handbook 44 (Appendix C, units of measure):
 * 1 ft = 0.3048 m, 1 US gal = 3.785 411 784 L, 1 lb = 0.453 592 37 kg, all exact.
 */
describe('SI ↔ US customary display units', () => {
  it('uses the exact definitions', () => {
    expect(M_PER_FT).toBe(0.3048);
    expect(L_PER_GAL).toBe(3.785411784);
    expect(KG_PER_LB).toBe(0.45359237);
    // 1 gal = 231 in³ and 1 in = 2.54 cm exactly (NIST HB 44 App. C): 231 × 2.54³ cm³ = 3785.411784 cm³.
    expect(231 * 2.54 ** 3).toBeCloseTo(3785.411784, 9);
  });

  it('derives MGD and gpm from the gallon: 1 MGD = 157.725 491 m³/h, 1 gpm = 0.227 124 707 m³/h', () => {
    // Hand computation: 10⁶ gal × 3.785411784 L / 1000 = 3785.411784 m³ per day; / 24 h = 157.7254910 m³/h.
    expect(1 / MGD_PER_M3H).toBeCloseTo(157.725491, 6);
    // 1 gal/min × 60 min/h × 0.003785411784 m³ = 0.22712470704 m³/h.
    expect(1 / GPM_PER_M3H).toBeCloseTo(0.22712470704, 10);
    // SP 811 App. B.9 lists gallon per minute → m³/s 6.309020 E-05: × 3600 s/h = 0.2271247 m³/h.
    expect(6.30902e-5 * 3600).toBeCloseTo(1 / GPM_PER_M3H, 6);
    // SP 811 App. B.9: square foot → m² 9.290304 E-02 (exact).
    expect(1 / FT2_PER_M2).toBeCloseTo(0.09290304, 12);
  });

  it('converts stored SI values for a US plant and back', () => {
    const flow = displayUnit('US', 'flowLarge_m3h');
    expect(flow.unit).toBe('MGD');
    expect(flow.fromSi(157.725491)).toBeCloseTo(1, 6);
    expect(flow.toSi(flow.fromSi(1234.5))).toBeCloseTo(1234.5, 9);
    expect(displayUnit('US', 'flow_m3h').fromSi(0.22712470704)).toBeCloseTo(1, 9);
    expect(displayUnit('US', 'length_m').fromSi(0.3048)).toBeCloseTo(1, 12);
    expect(displayUnit('US', 'area_m2').fromSi(1500)).toBeCloseTo(1500 / 0.09290304, 6);
    expect(displayUnit('US', 'mass_kg').fromSi(0.45359237)).toBeCloseTo(1, 12);
    // 1 MG = 3785.411784 m³.
    expect(displayUnit('US', 'volume_m3').fromSi(3785.411784)).toBeCloseTo(1, 12);
    // Concentrations: mg/L in both systems, 1 g/L = 1000 mg/L.
    expect(displayUnit('US', 'conc_gL').fromSi(3.2)).toBeCloseTo(3200, 9);
    expect(displayUnit('US', 'conc_gL').unit).toBe('mg/L');
  });

  it('SI plants see the stored values unchanged', () => {
    for (const q of ['flow_m3h', 'length_m', 'area_m2', 'volume_m3', 'mass_kg', 'conc_gL', 'conc_mgL'] as const) expect(displayUnit('SI', q).fromSi(42.5)).toBe(42.5);
  });

  it('recognises units by tag unit and by field suffix', () => {
    expect(quantityOfSiUnit('m3/h')).toBe('flow_m3h');
    expect(quantityOfSiUnit('m³/h')).toBe('flow_m3h');
    expect(quantityOfSiUnit('state')).toBeNull();
    expect(quantityOfField('influent_m3h')).toBe('flowLarge_m3h');
    expect(quantityOfField('rasFlow_m3h')).toBe('flow_m3h');
    expect(quantityOfField('mass_kg')).toBe('mass_kg');
    expect(quantityOfField('srt_d')).toBeNull();
  });
});
