import type { NextFunction, Request, Response } from 'express';
import { roleAtLeast, roleRank, type Role } from '../../shared/contracts/roles.ts';
import type { AppContext } from '../app-context.ts';
import { ForbiddenError, UnauthorizedError } from '../http/errors.ts';
import { sessionRepository, tokenRepository } from '../repositories/user.repository.ts';
import { hashToken } from './api-tokens.ts';
import { affects, CredentialCache, credentialCache } from './credential-cache.ts';
import { SESSION_COOKIE, verifySessionClaims } from './session.ts';
import type { Principal } from './principal.ts';

const TOUCH_EVERY_MS = 60_000;

function minRole(a: Role, b: Role): Role {
  return roleRank(a) <= roleRank(b) ? a : b;
}

/**
 * What an open, long-lived answer (a Server-Sent Events stream) needs to keep checking that its
 * caller still stands: `recheck` resolves the request's credentials again (the cache is dropped
 * on every revocation, so this reaches the database after one) and `onChange` announces every
 * credential change of this or another API process that concerns this caller.
 */
export interface CredentialWatch {
  recheck(): Promise<boolean>;
  onChange(listener: () => void): () => void;
}

declare module 'express-serve-static-core' {
  interface Request {
    credentialWatch?: CredentialWatch;
  }
}

/**
 * Resolves the caller from `Authorization: Bearer <token>` or the session cookie and puts it on
 * `req.principal`. It never rejects by itself: `requireRole` decides. A Bearer header that does
 * not resolve is remembered so the 401 can say why. Resolved callers are kept a short while in
 * the credential cache (`credential-cache.ts`: dropped at once on revocation or user change).
 * A session cookie stands only while its `sessions` row is neither revoked nor expired and its
 * user is not disabled.
 */
export function authenticate(ctx: AppContext) {
  const tokens = tokenRepository(ctx.db.db);
  const sessions = sessionRepository(ctx.db.db);
  const cache = credentialCache(ctx);
  /** Token id or session id → when its last-used time was last written by this process [epoch ms]. */
  const touched = new Map<string, number>();
  const touch = (key: string, write: () => Promise<void>) => {
    // Last-used is informative (token list, session row): written at most once a minute per
    // credential, and the request does not wait for it.
    const now = Date.now();
    if (now - (touched.get(key) ?? 0) < TOUCH_EVERY_MS) return;
    if (touched.size >= 10_000) touched.clear();
    touched.set(key, now);
    write().catch(() => {});
  };

  async function byToken(secret: string | undefined): Promise<Principal | undefined> {
    if (!secret) return undefined;
    const tokenHash = hashToken(secret);
    const key = CredentialCache.tokenKey(tokenHash);
    const cached = cache.get(key);
    if (cached) return cached;
    const generation = cache.generation;
    const row = await tokens.byHashWithUser(tokenHash);
    if (!row || row.token.revokedAt || row.token.expiresAt.getTime() <= Date.now() || row.user.disabled) return undefined;
    const principal: Principal = {
      userId: row.user.id,
      email: row.user.email,
      role: minRole(row.token.role, row.user.role),
      tokenId: row.token.id,
      plantIds: row.token.plantIds ?? null,
    };
    cache.set(key, principal, generation, row.token.expiresAt.getTime());
    return principal;
  }

  async function bySession(cookie: string): Promise<Principal | undefined> {
    const key = CredentialCache.sessionKey(cookie);
    const cached = cache.get(key);
    if (cached) return cached;
    const generation = cache.generation;
    const claims = await verifySessionClaims(ctx.sessionKey, cookie);
    if (!claims) return undefined;
    const row = await sessions.byIdWithUser(claims.sessionId);
    const now = Date.now();
    if (!row || row.user.id !== claims.userId || row.session.revokedAt || row.session.expiresAt.getTime() <= now || row.user.disabled) return undefined;
    const principal: Principal = { userId: row.user.id, email: row.user.email, role: row.user.role, tokenId: null, plantIds: null, sessionId: row.session.id };
    cache.set(key, principal, generation, Math.min(claims.expiresAt_ms, row.session.expiresAt.getTime()));
    return principal;
  }

  /** The caller of a request as its credentials say now; `failure` says why a Bearer header did not resolve. */
  async function resolve(req: Request): Promise<{ principal?: Principal; failure?: string }> {
    const header = req.headers.authorization;
    if (header !== undefined) {
      const principal = await byToken(/^Bearer\s+(\S+)$/i.exec(header)?.[1]);
      return principal ? { principal } : { failure: 'the API token is unknown, revoked or expired' };
    }
    const cookie = (req.cookies as Record<string, string> | undefined)?.[SESSION_COOKIE];
    return cookie ? { principal: await bySession(cookie) } : {};
  }

  return async (req: Request, _res: Response, next: NextFunction) => {
    const { principal, failure } = await resolve(req);
    if (failure) (req as Request & { authFailure?: string }).authFailure = failure;
    if (!principal) return next();
    req.principal = principal;
    if (principal.tokenId) touch(`t:${principal.tokenId}`, () => tokens.touch(principal.tokenId!));
    else if (principal.sessionId) touch(`s:${principal.sessionId}`, () => sessions.touch(principal.sessionId!));
    req.credentialWatch = {
      async recheck() {
        const now = (await resolve(req)).principal;
        return !!now && now.userId === principal.userId && now.tokenId === principal.tokenId && now.sessionId === principal.sessionId && now.role === principal.role;
      },
      onChange: (listener) => cache.onChange((change) => affects(change, principal) && listener()),
    };
    next();
  };
}

/** 401 without a valid caller, 403 when the caller's role is below `role`. */
export function requireRole(role: Role) {
  return (req: Request, _res: Response, next: NextFunction) => {
    const p = req.principal;
    if (!p) return next(new UnauthorizedError((req as Request & { authFailure?: string }).authFailure));
    if (!roleAtLeast(p.role, role)) return next(new ForbiddenError(`this needs the ${role} role or higher; you are ${p.role}`));
    next();
  };
}

/** For session-only actions (creating tokens, managing users): an API token may not do them. */
export function requireSession(req: Request, _res: Response, next: NextFunction) {
  if (req.principal?.tokenId) return next(new ForbiddenError('this action needs a signed-in session, not an API token'));
  next();
}

/** 403 when a plant-scoped token asks for a plant outside its scope. */
export function assertPlantAccess(req: Request, plantId: number): void {
  const scope = req.principal?.plantIds;
  if (scope && !scope.includes(plantId)) throw new ForbiddenError(`this token is not scoped to plant ${plantId}`);
}
