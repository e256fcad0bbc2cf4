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
 * Rows of one tag by bucket index. A map per tag keyed by a number is several times faster than
 * one map keyed by a `${tag}:${bucket}` string, which showed in the writer's profile (20 000
 * samples per batch, tests/bench/ingest.bench.ts).
 */
type ByTag = Map<number, Map<number, RollupRow>>;

function slot(byTag: ByTag, tagId: number): Map<number, RollupRow> {
  let m = byTag.get(tagId);
  if (!m) byTag.set(tagId, (m = new Map()));
  return m;
}

function flatten(byTag: ByTag): RollupRow[] {
  const out: RollupRow[] = [];
  for (const m of byTag.values()) for (const r of m.values()) out.push(r);
  return out;
}

/**
 * Aggregates the samples actually inserted into per-(tag, bucket) min/max/sum/count/last.
 * Samples with no value or with a Bad grade are left out: a failed sensor reporting 0 must not
 * pull a mean down; the rollup's quality is the worst of the samples it does include. Pure.
 * Rows come out grouped by tag, in order of first appearance.
 */
export function aggregate(samples: readonly Sample[], bucketMs: number): RollupRow[] {
  const byTag: ByTag = new Map();
  for (const s of samples) {
    const v = s.value;
    if (v === null || (s.quality & 0b11) >= QUALITY_GRADE.bad) continue;
    const idx = Math.floor(s.ts / bucketMs);
    const m = slot(byTag, s.tagId);
    const r = m.get(idx);
    if (!r) {
      m.set(idx, { tagId: s.tagId, bucket: idx * bucketMs, min: v, max: v, sum: v, count: 1, last: v, lastTs: s.ts, quality: s.quality });
    } else {
      if (v < r.min) r.min = v;
      if (v > r.max) r.max = v;
      r.sum += v;
      r.count++;
      if (s.ts >= r.lastTs) {
        r.last = v;
        r.lastTs = s.ts;
      }
      if (s.quality !== r.quality) r.quality = worst(r.quality, s.quality);
    }
  }
  return flatten(byTag);
}

/**
 * Merges rollup rows into coarser buckets (e.g. 1-minute rows into hours): min of mins, max of
 * maxes, sums and counts added, the latest last, the worst quality — the same figures
 * {@link aggregate} gives from the samples when the coarse bucket is a whole multiple of the
 * fine one. Pure; the input rows are not changed.
 */
export function mergeInto(rows: readonly RollupRow[], bucketMs: number): RollupRow[] {
  const byTag: ByTag = new Map();
  for (const x of rows) {
    const idx = Math.floor(x.bucket / bucketMs);
    const m = slot(byTag, x.tagId);
    const r = m.get(idx);
    if (!r) {
      m.set(idx, { ...x, bucket: idx * bucketMs });
    } else {
      if (x.min < r.min) r.min = x.min;
      if (x.max > r.max) r.max = x.max;
      r.sum += x.sum;
      r.count += x.count;
      if (x.lastTs >= r.lastTs) {
        r.last = x.last;
        r.lastTs = x.lastTs;
      }
      if (x.quality !== r.quality) r.quality = worst(r.quality, x.quality);
    }
  }
  return flatten(byTag);
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
