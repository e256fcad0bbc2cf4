import type { Request, Response } from 'express';
import { z } from 'zod';
import { loginRequest, me, type LoginRequest } from '../../shared/contracts/auth.ts';
import type { AppContext } from '../app-context.ts';
import { CredentialCache, credentialCache } from '../auth/credential-cache.ts';
import { LoginThrottle } from '../auth/login-throttle.ts';
import { dummyPasswordHash, verifyPassword } from '../auth/passwords.ts';
import { SESSION_COOKIE, SESSION_TTL_S, signSession } from '../auth/session.ts';
import { TooManyRequestsError, UnauthorizedError } from '../http/errors.ts';
import type { RouteDef } from '../http/route.ts';
import { userRepository } from '../repositories/user.repository.ts';
import { audit } from '../services/audit.service.ts';

export function authRoutes(ctx: AppContext): RouteDef[] {
  const users = userRepository(ctx.db.db);
  // Five failures per account, fifty per client address, in 15 minutes.
  const byEmail = new LoginThrottle(5);
  const byIp = new LoginThrottle(50);

  return [
    {
      method: 'post',
      path: '/auth/login',
      role: 'public',
      tag: 'auth',
      summary: 'Sign in; sets the httpOnly session cookie',
      body: loginRequest,
      response: me,
      handler: async (req: Request, res: Response) => {
        const { email, password } = req.valid.body as LoginRequest;
        const keysE = [email];
        const keysI = [req.ip ?? 'unknown'];
        const wait = Math.max(byEmail.retryAfter_s(keysE), byIp.retryAfter_s(keysI));
        if (wait > 0) throw new TooManyRequestsError(`too many failed sign-ins; try again in ${Math.ceil(wait / 60)} min`, wait);
        const user = await users.byEmail(email);
        const ok = await verifyPassword(user?.passwordHash ?? (await dummyPasswordHash()), password);
        if (!user || !ok || user.disabled) {
          byEmail.fail(keysE);
          byIp.fail(keysI);
          await audit(ctx, req, 'auth.login_failed', email);
          throw new UnauthorizedError('wrong e-mail or password');
        }
        byEmail.succeed(keysE);
        const jwt = await signSession(ctx.sessionKey, user.id);
        res.cookie(SESSION_COOKIE, jwt, { httpOnly: true, sameSite: 'strict', secure: ctx.config.secureCookies, path: '/', maxAge: SESSION_TTL_S * 1000 });
        req.principal = { userId: user.id, email: user.email, role: user.role, tokenId: null, plantIds: null };
        await audit(ctx, req, 'auth.login', `user:${user.id}`);
        return { id: user.id, email: user.email, name: user.name, role: user.role, viaToken: false };
      },
    },
    {
      method: 'post',
      path: '/auth/logout',
      role: 'public',
      tag: 'auth',
      summary: 'Sign out; clears the session cookie',
      response: z.object({ ok: z.literal(true) }),
      handler: async (req: Request, res: Response) => {
        const cookie = (req.cookies as Record<string, string> | undefined)?.[SESSION_COOKIE];
        if (cookie) credentialCache(ctx).dropKey(CredentialCache.sessionKey(cookie));
        res.clearCookie(SESSION_COOKIE, { httpOnly: true, sameSite: 'strict', secure: ctx.config.secureCookies, path: '/' });
        if (req.principal) await audit(ctx, req, 'auth.logout', `user:${req.principal.userId}`);
        return { ok: true as const };
      },
    },
    {
      method: 'get',
      path: '/auth/me',
      role: 'analyst',
      tag: 'auth',
      summary: 'The caller: user and effective role',
      response: me,
      handler: async (req: Request) => {
        const p = req.principal!;
        const u = await users.byId(p.userId);
        return { id: p.userId, email: p.email, name: u?.name ?? p.email, role: p.role, viaToken: p.tokenId !== null };
      },
    },
  ];
}
