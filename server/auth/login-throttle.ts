/**
 * Counts sign-in attempts per key (an e-mail, a client address) in a sliding window; after
 * `maxFailures` the key is locked out until the oldest failure leaves the window (OWASP
 * Authentication Cheat Sheet, "account lockout"/throttling). Kept in memory: one API process per
 * plant server; the recovery command (scripts/admin.ts) clears an account through NOTIFY.
 *
 * An attempt is reserved *before* the password hash is checked and counts against the limit
 * while it is in flight: parallel guesses cannot all pass the check and be recorded only after
 * their slow hashes (argon2id takes tens of milliseconds each). A reservation turns into a
 * failure, or is released on success.
 */
export interface Reservation {
  /** The password was wrong (or the account unusable): the attempt counts as a failure. */
  fail(): void;
  /** Signed in: the attempt is released and the key's failures are forgotten. */
  succeed(): void;
  /** Signed in, but the key's earlier failures still count (a client address shared by many). */
  release(): void;
}

export class LoginThrottle {
  private failures = new Map<string, number[]>();
  private inFlight = new Map<string, number>();
  constructor(
    private readonly maxFailures = 5,
    private readonly window_ms = 15 * 60_000,
  ) {}

  private recent(key: string, now: number): number[] {
    const list = (this.failures.get(key) ?? []).filter((t) => now - t < this.window_ms);
    if (list.length) this.failures.set(key, list);
    else this.failures.delete(key);
    return list;
  }

  /** Seconds until the key may try again (failures plus attempts in flight), or 0 when it may try now. */
  retryAfter_s(keys: string[], now: number): number {
    let wait = 0;
    for (const k of keys) {
      const list = this.recent(k, now);
      const flying = this.inFlight.get(k) ?? 0;
      if (list.length + flying < this.maxFailures) continue;
      // Locked by failures: until the oldest one that keeps the count at the limit leaves the
      // window. Held only by attempts in flight: a second, until they are decided.
      const keeping = list[list.length - (this.maxFailures - flying)];
      wait = Math.max(wait, keeping === undefined ? 1 : Math.max(1, Math.ceil((keeping + this.window_ms - now) / 1000)));
    }
    return wait;
  }

  /** Reserves one attempt on every key, or gives the seconds to wait when any key is at its limit. */
  reserve(keys: string[], now: number): { wait_s: number } | Reservation {
    const wait_s = this.retryAfter_s(keys, now);
    if (wait_s > 0) return { wait_s };
    for (const k of keys) this.inFlight.set(k, (this.inFlight.get(k) ?? 0) + 1);
    let done = false;
    const release = () => {
      if (done) return false;
      done = true;
      for (const k of keys) {
        const n = (this.inFlight.get(k) ?? 1) - 1;
        if (n > 0) this.inFlight.set(k, n);
        else this.inFlight.delete(k);
      }
      return true;
    };
    return {
      fail: () => {
        if (release()) for (const k of keys) this.failures.set(k, [...this.recent(k, now), now]);
      },
      succeed: () => {
        if (release()) this.clear(keys);
      },
      release: () => {
        release();
      },
    };
  }

  /** Forgets the failures of `keys` (a success, or the recovery command's unlock). */
  clear(keys: string[]): void {
    for (const k of keys) this.failures.delete(k);
  }
}
