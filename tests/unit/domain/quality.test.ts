import { describe, expect, it } from 'vitest';
import { combineQuality, estimated, finiteFigure, fromFigures, good, lift, meanFigures, propagate, qualityFromSampleGrade, sumFigures, unavailable, withUnit, worstQuality } from '../../../shared/domain/quality.js';

describe('figure quality', () => {
  it('worst wins and reasons are concatenated without duplicates', () => {
    expect(worstQuality()).toBe('good');
    expect(worstQuality('good', 'estimated')).toBe('estimated');
    expect(worstQuality('estimated', 'unavailable', 'good')).toBe('unavailable');
    const c = combineQuality(good(1), estimated(2, 'MLSS tag stale'), estimated(3, 'MLSS tag stale', 'SVI 3 days old'));
    expect(c).toEqual({ quality: 'estimated', reasons: ['MLSS tag stale', 'SVI 3 days old'] });
  });

  it('propagate downgrades a figure by its inputs; unavailable input nulls the value', () => {
    expect(propagate(good(5), estimated(1, 'a'))).toEqual({ value: 5, quality: 'estimated', reasons: ['a'] });
    expect(propagate(good(5), unavailable('flow tag bad'))).toEqual({ value: null, quality: 'unavailable', reasons: ['flow tag bad'] });
  });

  it('lift computes from input values and never calls fn with an unavailable input', () => {
    const sum = lift({ a: good(2), b: estimated(3, 'b estimated') }, (v) => good(v.a + v.b));
    expect(sum).toEqual({ value: 5, quality: 'estimated', reasons: ['b estimated'] });
    let called = false;
    const none = lift({ a: good(2), b: unavailable('b missing') }, (v) => {
      called = true;
      return good(v.a);
    });
    expect(called).toBe(false);
    expect(none).toMatchObject({ value: null, quality: 'unavailable', reasons: ['b missing'] });
  });

  it('non-finite numbers never escape as good figures', () => {
    expect(good(Number.NaN).quality).toBe('unavailable');
    expect(good(Infinity).value).toBeNull();
    expect(estimated(-Infinity, 'x').value).toBeNull();
    expect(finiteFigure(1 / 0, 'division by zero')).toEqual({ value: null, quality: 'unavailable', reasons: ['division by zero'] });
  });

  it('maps stored sample grades (OPC UA severity) to figure quality', () => {
    expect(qualityFromSampleGrade('good')).toBe('good');
    expect(qualityFromSampleGrade('uncertain')).toBe('estimated');
    expect(qualityFromSampleGrade('bad')).toBe('unavailable');
  });
});

describe('figure arithmetic with quality (sum, mean, positional lift)', () => {
  const a = good(2);
  const b = estimated(3, 'b drifts');
  const u = unavailable<number>('c offline');
  it('sum 2 + 3 = 5 carries the worst grade and every reason; an unavailable part makes it unavailable, never a partial sum', () => {
    expect(sumFigures([a, b], 'parts')).toEqual({ value: 5, quality: 'estimated', reasons: ['b drifts'] });
    expect(sumFigures([a, b, u], 'parts')).toEqual({ value: null, quality: 'unavailable', reasons: ['b drifts', 'c offline'] });
    expect(sumFigures([], 'basins')).toMatchObject({ value: null, reasons: ['no basins configured'] });
  });
  it('mean (2 + 3)/2 = 2.5 and fromFigures 2 × 3 = 6 propagate the same way', () => {
    expect(meanFigures([a, b], 'parts')).toMatchObject({ value: 2.5, quality: 'estimated' });
    expect(fromFigures([a, b], (x, y) => x * y)).toMatchObject({ value: 6, quality: 'estimated', reasons: ['b drifts'] });
    expect(fromFigures([a, b], () => unavailable('zero divisor'))).toMatchObject({ value: null, reasons: ['b drifts', 'zero divisor'] });
    expect(fromFigures([a, u], () => 1).value).toBeNull();
    expect(fromFigures([a], (x) => x / 0)).toMatchObject({ value: null, quality: 'unavailable' });
  });
  it('withUnit gives the contract shape with its own reasons array', () => {
    const out = withUnit(b, 'kg');
    expect(out).toEqual({ value: 3, quality: 'estimated', reasons: ['b drifts'], unit: 'kg' });
    expect(out.reasons).not.toBe(b.reasons);
  });
});
