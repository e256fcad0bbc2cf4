import { describe, expect, it } from 'vitest';
import type { Sample } from '../../../ingest/pipeline/types.ts';
import { byKey } from '../../../ingest/sink/sample-store.ts';
import { mulberry32 } from '../domain/prng.ts';

/** The reference: a stable sort by (tag, ts) (Array.prototype.sort is stable, ECMAScript 2019). */
const reference = (batch: readonly Sample[]) => [...batch].sort((x, y) => x.tagId - y.tagId || x.ts - y.ts);

describe('byKey: the batch in primary-key order (tag, ts) for the COPY', () => {
  it('orders 300 seeded batches exactly as a stable sort does, duplicates keeping arrival order', () => {
    const rnd = mulberry32(7);
    for (let b = 0; b < 300; b++) {
      const tags = 1 + Math.floor(rnd() * 50);
      const n = Math.floor(rnd() * 2_000);
      // interleaved tags; times mostly rising per tag, sometimes late or repeated
      const batch: Sample[] = Array.from({ length: n }, (_, i) => ({
        tagId: 1 + Math.floor(rnd() * tags),
        ts: 1_700_000_000_000 + (rnd() < 0.1 ? Math.floor(rnd() * 50) * 1000 : i * 100),
        value: i, // identifies the row, so the test sees which of two equal keys came first
        quality: 0,
      }));
      const got = byKey(batch);
      expect(got.map((s) => s.value)).toEqual(reference(batch).map((s) => s.value));
      expect(new Set(got).size).toBe(batch.length);
    }
  });

  it('returns a batch already in key order as it is', () => {
    const batch: Sample[] = [1, 1, 2, 3].map((tagId, i) => ({ tagId, ts: i, value: i, quality: 0 }));
    expect(byKey(batch)).toBe(batch);
  });
});
