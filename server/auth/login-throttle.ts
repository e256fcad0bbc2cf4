/**
 * Counts failed sign-ins per e-mail and per client address in a sliding window; after
 * `maxFailures` the key is locked out until the window has passed (OWASP Authentication
 * Cheat Sheet, "account lockout"/throttling). Kept in memory: one API process per plant server.
 */
export class LoginThrottle {
  private failures = new Map<string, number[]>();
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

  /** Seconds until the key may try again, or 0 when it may try now. */
  retryAfter_s(keys: string[], now = Date.now()): number {
    let wait = 0;
    for (const k of keys) {
      const list = this.recent(k, now);
      if (list.length >= this.maxFailures) wait = Math.max(wait, Math.ceil((list[0]! + this.window_ms - now) / 1000));
    }
    return wait;
  }

  fail(keys: string[], now = Date.now()): void {
    for (const k of keys) this.failures.set(k, [...this.recent(k, now), now]);
  }

  succeed(keys: string[]): void {
    for (const k of keys) this.failures.delete(k);
  }
}
