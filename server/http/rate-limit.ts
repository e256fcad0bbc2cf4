import type { NextFunction, Request, Response } from 'express';
import { TooManyRequestsError } from './errors.ts';

/**
 * Per-token rate limit for Bearer callers (scripts), a token bucket: each token starts with
 * `burst` requests and regains `ratePerSec` per second up to `burst`; a request finding less
 * than one is refused with 429 and `Retry-After` (RFC 9110 §10.2.3, whole seconds) until one
 * is back. Signed-in monitor sessions are not limited here (sign-in itself has its own throttle).
 * Mount right after `authenticate`, which sets `req.principal.tokenId`.
 *
 * The buckets live in this process: with several API processes each enforces its own share.
 * Idle full buckets are dropped when the table grows past `maxKeys`, so memory stays bounded.
 */
export interface RateLimitOptions {
  ratePerSec: number;
  burst: number;
  maxKeys: number;
  now: () => number;
}
export const DEFAULT_RATE_LIMIT: RateLimitOptions = { ratePerSec: 20, burst: 100, maxKeys: 10_000, now: () => performance.now() };

interface Bucket {
  tokens: number;
  at: number;
}

export function rateLimit(options: Partial<RateLimitOptions> = {}) {
  const o = { ...DEFAULT_RATE_LIMIT, ...options };
  const buckets = new Map<number, Bucket>();
  const refill = (b: Bucket, now: number) => {
    b.tokens = Math.min(o.burst, b.tokens + ((now - b.at) / 1000) * o.ratePerSec);
    b.at = now;
  };
  const sweep = (now: number) => {
    for (const [k, b] of buckets) {
      refill(b, now);
      if (b.tokens >= o.burst) buckets.delete(k);
    }
  };
  return (req: Request, _res: Response, next: NextFunction) => {
    const tokenId = req.principal?.tokenId;
    if (!tokenId) return next();
    const now = o.now();
    let b = buckets.get(tokenId);
    if (!b) {
      if (buckets.size >= o.maxKeys) sweep(now);
      b = { tokens: o.burst, at: now };
      buckets.set(tokenId, b);
    } else refill(b, now);
    if (b.tokens < 1) {
      const wait_s = Math.max(1, Math.ceil((1 - b.tokens) / o.ratePerSec));
      return next(new TooManyRequestsError(`rate limit: ${o.ratePerSec} requests per second per token (bursts up to ${o.burst}); retry in ${wait_s} s`, wait_s));
    }
    b.tokens -= 1;
    next();
  };
}
