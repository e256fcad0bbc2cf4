import type { NextFunction, Request, Response } from 'express';
import { roleAtLeast, roleRank, type Role } from '../../shared/contracts/roles.ts';
import type { AppContext } from '../app-context.ts';
import { ForbiddenError, UnauthorizedError } from '../http/errors.ts';
import { tokenRepository, userRepository } from '../repositories/user.repository.ts';
import { hashToken } from './api-tokens.ts';
import { CredentialCache, credentialCache } from './credential-cache.ts';
import { SESSION_COOKIE, verifySessionClaims } from './session.ts';
import type { Principal } from './principal.ts';

const TOUCH_EVERY_MS = 60_000;

function minRole(a: Role, b: Role): Role {
  return roleRank(a) <= roleRank(b) ? a : b;
}

/**
 * Resolves the caller from `Authorization: Bearer <token>` or the session cookie and puts it on
 * `req.principal`. It never rejects by itself: `requireRole` decides. A Bearer header that does
 * not resolve is remembered so the 401 can say why. Resolved callers are kept a short while in
 * the credential cache (`credential-cache.ts`: dropped at once on revocation or user change).
 */
export function authenticate(ctx: AppContext) {
  const users = userRepository(ctx.db.db);
  const tokens = tokenRepository(ctx.db.db);
  const cache = credentialCache(ctx);
  /** Token id → when its last-used time was last written by this process [epoch ms]. */
  const touched = new Map<number, number>();
  return async (req: Request, _res: Response, next: NextFunction) => {
    const header = req.headers.authorization;
    if (header !== undefined) {
      const m = /^Bearer\s+(\S+)$/i.exec(header);
      const tokenHash = m ? hashToken(m[1]!) : null;
      const key = tokenHash ? CredentialCache.tokenKey(tokenHash) : null;
      let principal = key ? cache.get(key) : undefined;
      if (!principal && tokenHash) {
        const generation = cache.generation;
        const row = await tokens.byHashWithUser(tokenHash);
        const now = Date.now();
        if (row && !row.token.revokedAt && row.token.expiresAt.getTime() > now && !row.user.disabled) {
          principal = {
            userId: row.user.id,
            email: row.user.email,
            role: minRole(row.token.role, row.user.role),
            tokenId: row.token.id,
            plantIds: row.token.plantIds ?? null,
          } satisfies Principal;
          cache.set(key!, principal, generation, row.token.expiresAt.getTime());
        }
      }
      if (principal) {
        req.principal = principal;
        // Last-used is informative (shown in the token list): written at most once a minute per
        // token, and the request does not wait for it.
        const now = Date.now();
        const tokenId = principal.tokenId!;
        if (now - (touched.get(tokenId) ?? 0) >= TOUCH_EVERY_MS) {
          if (touched.size >= 10_000) touched.clear();
          touched.set(tokenId, now);
          tokens.touch(tokenId).catch(() => {});
        }
      } else {
        (req as Request & { authFailure?: string }).authFailure = 'the API token is unknown, revoked or expired';
      }
      return next();
    }
    const cookie = (req.cookies as Record<string, string> | undefined)?.[SESSION_COOKIE];
    if (cookie) {
      const key = CredentialCache.sessionKey(cookie);
      const cached = cache.get(key);
      if (cached) {
        req.principal = cached;
        return next();
      }
      const generation = cache.generation;
      const claims = await verifySessionClaims(ctx.sessionKey, cookie);
      const user = claims ? await users.byId(claims.userId) : undefined;
      if (claims && user && !user.disabled) {
        req.principal = { userId: user.id, email: user.email, role: user.role, tokenId: null, plantIds: null };
        cache.set(key, req.principal, generation, claims.expiresAt_ms);
      }
    }
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
