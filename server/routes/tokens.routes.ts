import type { Request } from 'express';
import { z } from 'zod';
import { createTokenRequest, createTokenResponse, idParam, tokenOut, type CreateTokenRequest, type TokenOut } from '../../shared/contracts/auth.ts';
import { roleAtLeast } from '../../shared/contracts/roles.ts';
import type { AppContext } from '../app-context.ts';
import { hashToken, newTokenSecret, tokenPrefix } from '../auth/api-tokens.ts';
import { credentialChanged } from '../auth/credential-cache.ts';
import { ForbiddenError, NotFoundError } from '../http/errors.ts';
import type { RouteDef } from '../http/route.ts';
import { tokenRepository } from '../repositories/user.repository.ts';
import { audit } from '../services/audit.service.ts';

type TokenRow = Awaited<ReturnType<ReturnType<typeof tokenRepository>['listForUser']>>[number];
function out(t: TokenRow): TokenOut {
  return {
    ...t,
    expiresAt: t.expiresAt.toISOString(),
    revokedAt: t.revokedAt?.toISOString() ?? null,
    lastUsedAt: t.lastUsedAt?.toISOString() ?? null,
    createdAt: t.createdAt.toISOString(),
  };
}

/** The caller's own API tokens. Any role may hold tokens, with a role no higher than its own. */
export function tokensRoutes(ctx: AppContext): RouteDef[] {
  const repo = tokenRepository(ctx.db.db);
  const common = { role: 'analyst' as const, sessionOnly: true, tag: 'tokens' };
  return [
    {
      ...common,
      method: 'get',
      path: '/tokens',
      summary: 'List my API tokens (secrets are never shown again)',
      response: z.array(tokenOut),
      handler: async (req: Request) => (await repo.listForUser(req.principal!.userId)).map(out),
    },
    {
      ...common,
      method: 'post',
      path: '/tokens',
      summary: 'Create an API token; the secret is in this answer only',
      status: 201,
      body: createTokenRequest,
      response: createTokenResponse,
      handler: async (req: Request) => {
        const body = req.valid.body as CreateTokenRequest;
        const p = req.principal!;
        if (!roleAtLeast(p.role, body.role)) throw new ForbiddenError(`a token cannot have a higher role (${body.role}) than yours (${p.role})`);
        const secret = newTokenSecret();
        const expiresAt = new Date(Date.now() + body.expiresInDays * 86_400_000);
        const row = await repo.insert({ userId: p.userId, name: body.name, role: body.role, tokenHash: hashToken(secret), prefix: tokenPrefix(secret), plantIds: body.plantIds ?? null, expiresAt });
        await audit(ctx, req, 'token.create', `token:${row.id}`, { name: body.name, role: body.role, expiresAt: expiresAt.toISOString(), plantIds: body.plantIds ?? null });
        return { id: row.id, token: secret, expiresAt: expiresAt.toISOString() };
      },
    },
    {
      ...common,
      method: 'delete',
      path: '/tokens/:id',
      summary: 'Revoke one of my API tokens',
      params: idParam,
      response: z.object({ ok: z.literal(true) }),
      handler: async (req: Request) => {
        const { id } = req.valid.params as { id: number };
        if (!(await repo.revoke(req.principal!.userId, id))) throw new NotFoundError(`no active token ${id} of yours`);
        await credentialChanged(ctx, { tokenId: id });
        await audit(ctx, req, 'token.revoke', `token:${id}`);
        return { ok: true as const };
      },
    },
  ];
}
