import { describe, expect, it } from 'vitest';
import { trainTrendTags } from '../../../src/features/board/figures.ts';

/** An invented two-train plant: one basin, one clarifier, a RAS and a WAS pump per train. */
const t1 = { basins: [{ code: 'ab1' }], clarifiers: [{ code: 'sc1' }], pumps: [{ code: 'was1', kind: 'was' as const }, { code: 'ras1', kind: 'ras' as const }] };
const signals = [
  { tagId: 1, signal: 'plant.influentFlow', target: 'kb' },
  { tagId: 11, signal: 'basin.influentFlow', target: 'ab1' },
  { tagId: 12, signal: 'basin.mlss', target: 'ab1' },
  { tagId: 13, signal: 'clarifier.underflowTss', target: 'sc1' },
  { tagId: 14, signal: 'clarifier.effluentTss', target: 'sc1' },
  { tagId: 15, signal: 'clarifier.blanketLevel', target: 'sc1' },
  { tagId: 16, signal: 'pump.flow', target: 'was1' },
  { tagId: 17, signal: 'pump.flow', target: 'ras1' },
  { tagId: 18, signal: 'pump.running', target: 'ras1' },
  { tagId: 22, signal: 'basin.mlss', target: 'ab2' },
];

describe("a train's trend pens", () => {
  it("takes only the train's own units, blanket and solids first, RAS before WAS", () => {
    expect(trainTrendTags(t1, signals)).toEqual([15, 12, 13, 11, 17, 16, 14, 18]);
  });
  it('stops at the eight pens a trend holds', () => {
    const many = Array.from({ length: 12 }, (_, i) => ({ tagId: 100 + i, signal: 'basin.mlss', target: 'ab1' }));
    expect(trainTrendTags(t1, many)).toHaveLength(8);
  });
  it('a train with nothing mapped opens no pens', () => {
    expect(trainTrendTags({ basins: [{ code: 'ab9' }], clarifiers: [], pumps: [] }, signals)).toEqual([]);
  });
});
