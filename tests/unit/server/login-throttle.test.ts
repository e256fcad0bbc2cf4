import { describe, expect, it } from 'vitest';
import { LoginThrottle, type Reservation } from '../../../server/auth/login-throttle.ts';

/**
 * The sign-in throttle on an injected clock (OWASP Authentication Cheat Sheet: a limit on failed
 * attempts per account in a window). Attempts in flight count against the limit, so parallel
 * guesses cannot all pass the check before any is recorded.
 */
const WINDOW_MS = 15 * 60_000;
const reserved = (r: ReturnType<LoginThrottle['reserve']>): Reservation => {
  if (!('fail' in r)) throw new Error(`refused, wait ${r.wait_s} s`);
  return r;
};

describe('LoginThrottle', () => {
  it('at most the limit may be in flight at once; the sixth is refused before any is decided', () => {
    const t = new LoginThrottle(5, WINDOW_MS);
    const held = Array.from({ length: 5 }, () => reserved(t.reserve(['a@x'], 0)));
    const sixth = t.reserve(['a@x'], 0);
    expect(sixth).toEqual({ wait_s: 1 });
    // Another account is not held up.
    expect('fail' in t.reserve(['b@x'], 0)).toBe(true);
    // One success releases its slot and forgets failures; one more may try.
    held[0]!.succeed();
    expect('fail' in t.reserve(['a@x'], 0)).toBe(true);
  });

  it('five failures lock the key until the oldest leaves the 15-minute window', () => {
    const t = new LoginThrottle(5, WINDOW_MS);
    for (let i = 0; i < 5; i++) reserved(t.reserve(['a@x'], i * 60_000)).fail();
    // Failures at 0, 1, 2, 3, 4 min: at 5 min the first leaves at 15 min → 600 s to wait.
    expect(t.reserve(['a@x'], 5 * 60_000)).toEqual({ wait_s: 600 });
    expect('fail' in t.reserve(['a@x'], WINDOW_MS)).toBe(true);
  });

  it('a reservation counts once: fail or succeed twice changes nothing more; release keeps earlier failures', () => {
    const t = new LoginThrottle(2, WINDOW_MS);
    const r = reserved(t.reserve(['ip'], 0));
    r.fail();
    r.fail();
    const s = reserved(t.reserve(['ip'], 0));
    s.release();
    s.succeed();
    // One failure recorded, nothing in flight: one more may try, then the key is full.
    reserved(t.reserve(['ip'], 0)).fail();
    expect(t.reserve(['ip'], 0)).toEqual({ wait_s: WINDOW_MS / 1000 });
    t.clear(['ip']);
    expect('fail' in t.reserve(['ip'], 0)).toBe(true);
  });
});
