import { useSyncExternalStore } from 'react';

/**
 * A shared wall clock that ticks every `TICK_MS`: only the components that show an age subscribe,
 * so ages stay current without re-rendering the panels around them.
 */
const TICK_MS = 1000;
let now = Date.now();
const listeners = new Set<() => void>();
let timer: ReturnType<typeof setInterval> | null = null;

function subscribe(l: () => void) {
  listeners.add(l);
  if (!timer) {
    timer = setInterval(() => {
      now = Date.now();
      for (const f of listeners) f();
    }, TICK_MS);
  }
  return () => {
    listeners.delete(l);
    if (listeners.size === 0 && timer) {
      clearInterval(timer);
      timer = null;
    }
  };
}

export function useNow(): number {
  return useSyncExternalStore(subscribe, () => now);
}
