import { describe, expect, it } from 'vitest';
import { boardFigure } from '../../../src/features/board/unit-display.ts';

/**
 * The board's one conversion point. Factors from the exact definitions in NIST SP 811 (2008),
 * Appendix B: 1 ft = 0.3048 m, 1 US gal = 3.785411784 L, 1 lb = 0.45359237 kg.
 */
describe('board figures in the plant unit system', () => {
  it('leaves an SI plant as stored', () => {
    expect(boardFigure('SI', 800, 'm3/h')).toEqual({ value: 800, unit: 'm3/h' });
    expect(boardFigure('SI', 3.0, 'g/L')).toEqual({ value: 3.0, unit: 'g/L' });
  });

  it('shows a US plant its flows in MGD, lengths in ft, areas in ft², masses in lb, concentrations in mg/L', () => {
    // 800 m³/h × 24 h = 19 200 m³/d = 19 200 / 0.003785411784 gal = 5.0721 MGD
    const q = boardFigure('US', 800, 'm3/h');
    expect(q.unit).toBe('MGD');
    expect(q.value).toBeCloseTo(19_200 / 0.003785411784 / 1e6, 9);
    expect(q.value).toBeCloseTo(5.0721, 4);
    // 1.0 m = 1 / 0.3048 ft = 3.2808 ft
    expect(boardFigure('US', 1.0, 'm')).toEqual({ value: expect.closeTo(3.28084, 5), unit: 'ft' });
    // 1500 m² / 0.09290304 m²/ft² = 16 145.866 ft²
    expect(boardFigure('US', 1500, 'm2')).toEqual({ value: expect.closeTo(16_145.866, 2), unit: 'ft²' });
    // 18 000 kg / 0.45359237 = 39 683.2 lb
    expect(boardFigure('US', 18_000, 'kg')).toEqual({ value: expect.closeTo(39_683.21, 2), unit: 'lb' });
    // 3.0 g/L = 3000 mg/L; mg/L stays
    expect(boardFigure('US', 3.0, 'g/L')).toEqual({ value: expect.closeTo(3000, 9), unit: 'mg/L' });
    expect(boardFigure('US', 10, 'mg/L')).toEqual({ value: 10, unit: 'mg/L' });
  });

  it('keeps units without a US counterpart and unavailable values', () => {
    expect(boardFigure('US', 12.5, 'd')).toEqual({ value: 12.5, unit: 'd' });
    expect(boardFigure('US', 120, 'mL/g')).toEqual({ value: 120, unit: 'mL/g' });
    expect(boardFigure('US', null, 'm3/h')).toEqual({ value: null, unit: 'MGD' });
  });
});
