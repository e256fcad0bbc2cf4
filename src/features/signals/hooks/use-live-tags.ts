import { useMemo, useSyncExternalStore } from 'react';
import { streamTagEvent } from '../../../../shared/contracts/plant-api.ts';
import { usePlantStream, type StreamState } from '../../../lib/stream.ts';

/** One live value as the stream sends it (quality is the stored code). */
export interface LiveValue {
  value: number | null;
  ts: string;
  quality: number;
}

/**
 * Latest values pushed by the stream, outside React state: a `tag` event updates one entry and
 * wakes only the rows subscribed to that tag id, so thousands of tags never re-render together.
 */
export class LiveTagStore {
  private values = new Map<number, LiveValue>();
  private listeners = new Map<number, Set<() => void>>();

  get(tagId: number): LiveValue | undefined {
    return this.values.get(tagId);
  }

  subscribe(tagId: number, cb: () => void): () => void {
    let set = this.listeners.get(tagId);
    if (!set) this.listeners.set(tagId, (set = new Set()));
    set.add(cb);
    return () => {
      set.delete(cb);
      if (set.size === 0) this.listeners.delete(tagId);
    };
  }

  push(tagId: number, v: LiveValue): void {
    const prev = this.values.get(tagId);
    // An older value (a late poll row) never overwrites a newer one.
    if (prev && Date.parse(prev.ts) > Date.parse(v.ts)) return;
    this.values.set(tagId, v);
    for (const cb of this.listeners.get(tagId) ?? []) cb();
  }
}

/** A store fed by the plant's `tag` events; a new store per plant. */
export function useLiveTagStore(plantId: number | null): { store: LiveTagStore; state: StreamState } {
  // A new store when the plant changes: values of another plant must not leak into this one.
  const store = useMemo(() => new LiveTagStore(), [plantId]);
  const state = usePlantStream(plantId, ['tag'], (_event, data) => {
    const e = streamTagEvent.safeParse(data);
    if (e.success) store.push(e.data.tagId, { value: e.data.value, ts: e.data.ts, quality: e.data.quality });
  });
  return { store, state };
}

/** The live value of one tag; re-renders the caller only when that tag changes. */
export function useLiveTag(store: LiveTagStore, tagId: number): LiveValue | undefined {
  return useSyncExternalStore(
    (cb) => store.subscribe(tagId, cb),
    () => store.get(tagId),
  );
}

// One shared seconds clock, so ages advance without each row running its own timer.
const clockListeners = new Set<() => void>();
let clockNow = Date.now();
let clockTimer: ReturnType<typeof setInterval> | null = null;
function subscribeClock(cb: () => void): () => void {
  clockListeners.add(cb);
  if (!clockTimer)
    clockTimer = setInterval(() => {
      clockNow = Date.now();
      for (const l of clockListeners) l();
    }, 1000);
  return () => {
    clockListeners.delete(cb);
    if (clockListeners.size === 0 && clockTimer) {
      clearInterval(clockTimer);
      clockTimer = null;
    }
  };
}

/** Client time [ms since epoch], advancing once a second while anyone listens. */
export function useSecondsClock(): number {
  return useSyncExternalStore(subscribeClock, () => clockNow);
}
