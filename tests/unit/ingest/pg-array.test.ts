import { describe, expect, it } from 'vitest';
import { pgNumberArray } from '../../../ingest/sink/sample-store.ts';

describe('pgNumberArray', () => {
  it('writes PostgreSQL array literals of numbers (PostgreSQL documentation, 8.15.6 Array Input and Output Syntax)', () => {
    expect(pgNumberArray([])).toBe('{}');
    expect(pgNumberArray([1, null, 1.5, -2e-7, 1e21, 1764633600123])).toBe('{1,NULL,1.5,-2e-7,1e+21,1764633600123}');
    // float8 input accepts these spellings as well (PostgreSQL documentation, 8.1.3 Floating-Point Types)
    expect(pgNumberArray([Number.NaN, Number.POSITIVE_INFINITY, Number.NEGATIVE_INFINITY])).toBe('{NaN,Infinity,-Infinity}');
  });
});
