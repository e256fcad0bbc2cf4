import { DEFAULT_QUALITY_OPTIONS, TagProcessor, type QualityOptions } from './quality.ts';
import type { TagConfig } from './types.ts';

function sameConfig(a: TagConfig, b: TagConfig): boolean {
  return (
    a.address === b.address &&
    a.scaleGain === b.scaleGain &&
    a.scaleOffset === b.scaleOffset &&
    a.deadband === b.deadband &&
    a.expectedPeriod_s === b.expectedPeriod_s &&
    a.rangeLow === b.rangeLow &&
    a.rangeHigh === b.rangeHigh &&
    a.samplingInterval_ms === b.samplingInterval_ms &&
    a.kind === b.kind
  );
}

/** The enabled tags of one source with their processors; a reload keeps the state of unchanged tags. */
export class TagSet {
  private byId = new Map<number, TagProcessor>();

  constructor(private opts: QualityOptions = DEFAULT_QUALITY_OPTIONS) {}

  /** Tags whose latest sample is older than their staleness limit at `now`. */
  staleCount(now: number): number {
    let n = 0;
    for (const p of this.byId.values()) if (p.isStale(now)) n++;
    return n;
  }

  /** Replaces the tag list; returns true when anything changed. */
  update(tags: readonly TagConfig[]): boolean {
    let changed = tags.length !== this.byId.size;
    const next = new Map<number, TagProcessor>();
    for (const t of tags) {
      const cur = this.byId.get(t.id);
      if (cur && sameConfig(cur.tag, t)) next.set(t.id, cur);
      else {
        next.set(t.id, new TagProcessor(t, this.opts));
        changed = true;
      }
    }
    this.byId = next;
    return changed;
  }

  get(id: number): TagProcessor | undefined {
    return this.byId.get(id);
  }

  all(): IterableIterator<TagProcessor> {
    return this.byId.values();
  }

  get size(): number {
    return this.byId.size;
  }
}
