import { z } from 'zod';
import { loginRequest, me } from '../../shared/contracts/auth.ts';
import { services, type AppContext } from '../app-context.ts';
import { SESSION_COOKIE, SESSION_TTL_S } from '../auth/session.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';

export function authRoutes(ctx: AppContext): RouteDef[] {
  const { auth } = services(ctx);
  const cookie = { httpOnly: true, sameSite: 'strict', secure: ctx.config.secureCookies, path: '/' } as const;
  return [
    defineRoute({
      method: 'post',
      path: '/auth/login',
      role: 'public',
      tag: 'auth',
      summary: 'Sign in; sets the httpOnly session cookie',
      body: loginRequest,
      response: me,
      handler: async ({ body, req, res }) => {
        const { session, me } = await auth.login(body.email, body.password, { ip: req.ip ?? null, userAgent: req.get('user-agent') ?? null });
        res.cookie(SESSION_COOKIE, session, { ...cookie, maxAge: SESSION_TTL_S * 1000 });
        return me;
      },
    }),
    defineRoute({
      method: 'post',
      path: '/auth/logout',
      role: 'public',
      tag: 'auth',
      summary: 'Sign out; ends the session server-side (a copy of the cookie stops working) and clears the cookie',
      response: z.object({ ok: z.literal(true) }),
      handler: ({ principal, res }) => {
        res.clearCookie(SESSION_COOKIE, cookie);
        return auth.logout(principal);
      },
    }),
    defineRoute({
      method: 'get',
      path: '/auth/me',
      role: 'analyst',
      tag: 'auth',
      summary: 'The caller: user and effective role',
      response: me,
      handler: ({ principal }) => auth.me(principal),
    }),
  ];
}
