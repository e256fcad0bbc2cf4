import { hash } from 'node:crypto';
import { z } from 'zod';
import type { AppContext } from '../app-context.ts';
import type { Principal } from './principal.ts';

/**
 * Resolved callers kept in memory for a short time, so a request with a known session cookie or
 * API token costs no database round trip (and a session no JWT verification). Keys are hashes:
 * `t:` + the token's stored SHA-256, `s:` + SHA-256 of the session cookie — no secret is kept.
 *
 * Revocation stays immediate:
 * - whatever changes a credential calls `credentialChanged(ctx, …)`: it drops the entries of this
 *   process at once and announces the change with `pg_notify('flocstream_auth', …)` so every other
 *   API process drops its entries as well (token revoked, user changed, disabled or removed);
 * - entries are served only while this process LISTENs (`PgListener`); while that connection is
 *   down the cache is empty and every request goes to the database;
 * - a lookup that started before an invalidation does not store its (possibly old) answer
 *   (`generation`), so a request racing a revocation cannot put the revoked principal back;
 * - an entry lives at most `ttl_ms`, and never past the token's or session's own expiry.
 * Negative answers (unknown token, bad cookie) are not cached.
 *
 * Least recently used entries go first when `max` is reached (a Map keeps insertion order; a hit
 * moves its entry to the end).
 */
export const AUTH_CHANNEL = 'flocstream_auth';
/**
 * `userId`: a user changed (password, role, disabled, removed); `tokenId`: a token revoked;
 * `sessionId`: one session signed out; `unlockUserId`: the recovery command (scripts/admin.ts)
 * cleared a user's sign-in lock-out, which the API processes forget at once.
 */
export const authNotification = z.union([
  z.object({ userId: z.number().int().positive() }).strict(),
  z.object({ tokenId: z.number().int().positive() }).strict(),
  z.object({ sessionId: z.string().min(1).max(64) }).strict(),
  z.object({ unlockUserId: z.number().int().positive() }).strict(),
]);
export type AuthChange = z.infer<typeof authNotification>;

export interface CredentialCacheOptions {
  max: number;
  ttl_ms: number;
  now: () => number;
}
export const DEFAULT_CREDENTIAL_CACHE: CredentialCacheOptions = { max: 10_000, ttl_ms: 10_000, now: () => Date.now() };

interface Entry {
  principal: Principal;
  expiresAt: number;
}

export class CredentialCache {
  private readonly entries = new Map<string, Entry>();
  /** Bumped by every invalidation; a lookup stores its answer only if it did not change meanwhile. */
  generation = 0;
  /** False while the LISTEN connection is down: nothing is served or stored then. */
  enabled = false;
  readonly opts: CredentialCacheOptions;

  constructor(opts: Partial<CredentialCacheOptions> = {}) {
    this.opts = { ...DEFAULT_CREDENTIAL_CACHE, ...opts };
  }

  static tokenKey(tokenHash: string): string {
    return `t:${tokenHash}`;
  }

  static sessionKey(cookie: string): string {
    return `s:${hash('sha256', cookie, 'base64url')}`;
  }

  get size(): number {
    return this.entries.size;
  }

  get(key: string): Principal | undefined {
    if (!this.enabled) return undefined;
    const e = this.entries.get(key);
    if (!e) return undefined;
    this.entries.delete(key);
    if (e.expiresAt <= this.opts.now()) return undefined;
    this.entries.set(key, e);
    return e.principal;
  }

  /** Stores `principal` unless an invalidation happened since `generation` was read. */
  set(key: string, principal: Principal, generation: number, credentialExpiresAt: number): void {
    if (!this.enabled || generation !== this.generation) return;
    const expiresAt = Math.min(this.opts.now() + this.opts.ttl_ms, credentialExpiresAt);
    this.entries.delete(key);
    if (this.entries.size >= this.opts.max) this.entries.delete(this.entries.keys().next().value!);
    this.entries.set(key, { principal, expiresAt });
  }

  drop(change: AuthChange): void {
    this.generation++;
    for (const [k, e] of this.entries) if (affects(change, e.principal)) this.entries.delete(k);
    for (const l of this.listeners) {
      try {
        l(change);
      } catch {
        // A listener's failure (a closed stream) must not stop the others from hearing it.
      }
    }
  }

  private readonly listeners = new Set<(change: AuthChange) => void>();
  /**
   * Called after every change is applied here (this process's or another's, through NOTIFY):
   * open streams re-check their caller, the sign-in throttle forgets an unlocked account.
   * Returns the unsubscribe.
   */
  onChange(listener: (change: AuthChange) => void): () => void {
    this.listeners.add(listener);
    return () => this.listeners.delete(listener);
  }

  dropKey(key: string): void {
    this.generation++;
    this.entries.delete(key);
  }

  setEnabled(on: boolean): void {
    this.generation++;
    this.entries.clear();
    this.enabled = on;
  }
}

/** Whether `change` concerns a caller (the entries to drop, the streams to re-check). */
export function affects(change: AuthChange, p: Principal): boolean {
  if ('userId' in change) return p.userId === change.userId;
  if ('tokenId' in change) return p.tokenId === change.tokenId;
  if ('sessionId' in change) return p.sessionId === change.sessionId;
  return false;
}

const caches = new WeakMap<AppContext, CredentialCache>();

/** The credential cache of this application context, listening for other processes' changes. */
export function credentialCache(ctx: AppContext): CredentialCache {
  const c = caches.get(ctx);
  if (c) return c;
  const cache = new CredentialCache();
  caches.set(ctx, cache);
  const listener = ctx.db.listener(ctx.log);
  listener.onState((up) => cache.setEnabled(up));
  listener.on(AUTH_CHANNEL, (payload) => {
    let r;
    try {
      r = authNotification.safeParse(JSON.parse(payload));
    } catch {
      r = null;
    }
    // An announcement we cannot read may be a revocation: drop everything rather than guess.
    if (!r?.success) {
      ctx.log.warn({ payload: payload.slice(0, 200) }, `${AUTH_CHANNEL}: unreadable payload; credential cache emptied`);
      cache.setEnabled(cache.enabled);
      return;
    }
    cache.drop(r.data);
  });
  cache.setEnabled(listener.up);
  return cache;
}

/**
 * A user, token or session changed (revoked, signed out, disabled, role or password changed,
 * removed), or a lock-out was cleared: drop it from
 * this process's cache now and tell every other API process. Call after the change committed.
 */
export async function credentialChanged(ctx: AppContext, change: AuthChange): Promise<void> {
  credentialCache(ctx).drop(change);
  await ctx.db.pool.query('SELECT pg_notify($1, $2)', [AUTH_CHANNEL, JSON.stringify(change)]);
}
