import { z } from 'zod';
import { createTokenRequest, createTokenResponse, idParam, tokenOut } from '../../shared/contracts/auth.ts';
import { services, type AppContext } from '../app-context.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';

/** The caller's own API tokens. Any role may hold tokens, with a role no higher than its own. */
export function tokensRoutes(ctx: AppContext): RouteDef[] {
  const { tokens } = services(ctx);
  const common = { role: 'analyst' as const, sessionOnly: true, tag: 'tokens' };
  return [
    defineRoute({
      ...common,
      method: 'get',
      path: '/tokens',
      summary: 'List my API tokens (secrets are never shown again)',
      response: z.array(tokenOut),
      handler: ({ principal }) => tokens.list(principal),
    }),
    defineRoute({
      ...common,
      method: 'post',
      path: '/tokens',
      summary: 'Create an API token; the secret is in this answer only',
      status: 201,
      body: createTokenRequest,
      response: createTokenResponse,
      handler: ({ body, principal }) => tokens.create(principal, body),
    }),
    defineRoute({
      ...common,
      method: 'delete',
      path: '/tokens/:id',
      summary: 'Revoke one of my API tokens',
      params: idParam,
      response: z.object({ ok: z.literal(true) }),
      handler: ({ params, principal }) => tokens.revoke(principal, params.id),
    }),
  ];
}
