/**
 * Waiting without sleeping on a guess: poll a condition until it holds or a deadline passes, or
 * wait for an event. A failure says what was awaited and the last value seen.
 */
import type { EventEmitter } from 'node:events';

export interface WaitOptions {
  /** Give up after this long (default 10 s). */
  timeout_ms?: number;
  /** Time between polls (default 20 ms). */
  every_ms?: number;
  /** What is awaited, for the error message. */
  what?: string;
}

/**
 * Calls `probe` until `done(value)` holds and resolves with that value; rejects with the last
 * value after `timeout_ms`. `done` defaults to truthiness.
 */
export function waitFor<T>(probe: () => T | Promise<T>, done: (v: T) => boolean, opts?: WaitOptions): Promise<T>;
export function waitFor<T>(probe: () => T | Promise<T>, done?: undefined, opts?: WaitOptions): Promise<NonNullable<T>>;
export async function waitFor<T>(probe: () => T | Promise<T>, done: (v: T) => boolean = (v) => Boolean(v), opts: WaitOptions = {}): Promise<T> {
  const { timeout_ms = 10_000, every_ms = 20, what = 'the condition' } = opts;
  const deadline = Date.now() + timeout_ms;
  for (;;) {
    const v = await probe();
    if (done(v)) return v;
    if (Date.now() >= deadline) throw new Error(`${what} did not hold within ${timeout_ms} ms (last: ${JSON.stringify(v)})`);
    await new Promise((r) => setTimeout(r, every_ms));
  }
}

/** Resolves with the arguments of the next `event` on `emitter`, or rejects after `timeout_ms`. */
export function nextEvent<A extends unknown[]>(emitter: EventEmitter, event: string, timeout_ms = 10_000): Promise<A> {
  return new Promise((resolve, reject) => {
    const on = (...args: unknown[]) => {
      clearTimeout(t);
      resolve(args as A);
    };
    const t = setTimeout(() => {
      emitter.off(event, on);
      reject(new Error(`no ${event} event within ${timeout_ms} ms`));
    }, timeout_ms);
    emitter.once(event, on);
  });
}
