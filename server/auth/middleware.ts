import type { NextFunction, Request, Response } from 'express';
import { roleAtLeast, roleRank, type Role } from '../../shared/contracts/roles.ts';
import type { AppContext } from '../app-context.ts';
import { ForbiddenError, UnauthorizedError } from '../http/errors.ts';
import { tokenRepository, userRepository } from '../repositories/user.repository.ts';
import { hashToken } from './api-tokens.ts';
import { SESSION_COOKIE, verifySession } from './session.ts';
import type { Principal } from './principal.ts';

function minRole(a: Role, b: Role): Role {
  return roleRank(a) <= roleRank(b) ? a : b;
}

/**
 * Resolves the caller from `Authorization: Bearer <token>` or the session cookie and puts it on
 * `req.principal`. It never rejects by itself: `requireRole` decides. A Bearer header that does
 * not resolve is remembered so the 401 can say why.
 */
export function authenticate(ctx: AppContext) {
  const users = userRepository(ctx.db.db);
  const tokens = tokenRepository(ctx.db.db);
  return async (req: Request, _res: Response, next: NextFunction) => {
    const header = req.headers.authorization;
    if (header !== undefined) {
      const m = /^Bearer\s+(\S+)$/i.exec(header);
      const row = m ? await tokens.byHashWithUser(hashToken(m[1]!)) : undefined;
      const now = Date.now();
      if (row && !row.token.revokedAt && row.token.expiresAt.getTime() > now && !row.user.disabled) {
        req.principal = {
          userId: row.user.id,
          email: row.user.email,
          role: minRole(row.token.role, row.user.role),
          tokenId: row.token.id,
          plantIds: row.token.plantIds ?? null,
        } satisfies Principal;
        // Last-used is informative; do not hold the request for it.
        tokens.touch(row.token.id).catch(() => {});
      } else {
        (req as Request & { authFailure?: string }).authFailure = 'the API token is unknown, revoked or expired';
      }
      return next();
    }
    const cookie = (req.cookies as Record<string, string> | undefined)?.[SESSION_COOKIE];
    if (cookie) {
      const userId = await verifySession(ctx.sessionKey, cookie);
      const user = userId ? await users.byId(userId) : undefined;
      if (user && !user.disabled) {
        req.principal = { userId: user.id, email: user.email, role: user.role, tokenId: null, plantIds: null };
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
