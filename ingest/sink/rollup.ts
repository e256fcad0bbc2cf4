import { QUALITY_GRADE } from '../../shared/contracts/sample-quality.ts';
import type { Sample } from '../pipeline/types.ts';

/** Aggregate of one tag over one bucket, mergeable with another of the same key. */
export interface RollupRow {
  tagId: number;
  bucket: number;
  min: number;
  max: number;
  sum: number;
  count: number;
  last: number;
  lastTs: number;
  quality: number;
}

/** Worst of two quality codes: highest grade, flags united (shared/contracts/sample-quality.ts). */
function worst(a: number, b: number): number {
  return ((a | b) & ~0b11) | Math.max(a & 0b11, b & 0b11);
}

/**
 * Aggregates the samples actually inserted into per-(tag, bucket) min/max/sum/count/last.
 * Samples with no value or with a Bad grade are left out: a failed sensor reporting 0 must not
 * pull a mean down; the rollup's quality is the worst of the samples it does include. Pure.
 */
export function aggregate(samples: readonly Sample[], bucketMs: number): RollupRow[] {
  const out = new Map<string, RollupRow>();
  for (const s of samples) {
    if (s.value === null || (s.quality & 0b11) >= QUALITY_GRADE.bad) continue;
    const bucket = Math.floor(s.ts / bucketMs) * bucketMs;
    const key = `${s.tagId}:${bucket}`;
    const r = out.get(key);
    if (!r) {
      out.set(key, { tagId: s.tagId, bucket, min: s.value, max: s.value, sum: s.value, count: 1, last: s.value, lastTs: s.ts, quality: s.quality });
    } else {
      if (s.value < r.min) r.min = s.value;
      if (s.value > r.max) r.max = s.value;
      r.sum += s.value;
      r.count++;
      if (s.ts >= r.lastTs) {
        r.last = s.value;
        r.lastTs = s.ts;
      }
      r.quality = worst(r.quality, s.quality);
    }
  }
  return [...out.values()];
}

/** Latest sample per tag (by timestamp) for the tag_latest cache. */
export function latestPerTag(samples: readonly Sample[]): Sample[] {
  const out = new Map<number, Sample>();
  for (const s of samples) {
    const cur = out.get(s.tagId);
    if (!cur || s.ts >= cur.ts) out.set(s.tagId, s);
  }
  return [...out.values()];
}
