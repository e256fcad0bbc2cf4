import type { AuthChange } from '../auth/credential-cache.ts';
import type { CreateTokenRequest, TokenOut } from '../../shared/contracts/auth.ts';
import { roleAtLeast } from '../../shared/contracts/roles.ts';
import type { Clock } from '../app-context.ts';
import { hashToken, newTokenSecret, tokenPrefix } from '../auth/api-tokens.ts';
import type { Principal } from '../auth/principal.ts';
import { ForbiddenError, NotFoundError } from '../http/errors.ts';
import type { TokenRepository } from '../repositories/user.repository.ts';
import type { Actor, AuditLog } from './audit.service.ts';

type TokenRow = Awaited<ReturnType<TokenRepository['listForUser']>>[number];
function out(t: TokenRow): TokenOut {
  return {
    ...t,
    expiresAt: t.expiresAt.toISOString(),
    revokedAt: t.revokedAt?.toISOString() ?? null,
    lastUsedAt: t.lastUsedAt?.toISOString() ?? null,
    createdAt: t.createdAt.toISOString(),
  };
}

export interface TokenServiceDeps {
  /** Drops the cached caller of a revoked token at once, here and in other API processes (server/auth/credential-cache.ts). */
  credentialsChanged: (change: AuthChange) => Promise<void>;
  tokenRepo: Pick<TokenRepository, 'listForUser' | 'insert' | 'revoke'>;
  audit: AuditLog;
  clock: Clock;
}

/** The caller's own API tokens. Any role may hold tokens, with a role no higher than its own; the secret is shown once and stored hashed. */
export function createTokenService({ tokenRepo, audit, clock, credentialsChanged }: TokenServiceDeps) {
  return {
    async list(principal: Principal): Promise<TokenOut[]> {
      return (await tokenRepo.listForUser(principal.userId)).map(out);
    },
    async create(principal: Actor, body: CreateTokenRequest): Promise<{ id: number; token: string; expiresAt: string }> {
      if (!roleAtLeast(principal.role, body.role)) throw new ForbiddenError(`a token cannot have a higher role (${body.role}) than yours (${principal.role})`);
      const secret = newTokenSecret();
      const expiresAt = new Date(clock() + body.expiresInDays * 86_400_000);
      const row = await tokenRepo.insert({ userId: principal.userId, name: body.name, role: body.role, tokenHash: hashToken(secret), prefix: tokenPrefix(secret), plantIds: body.plantIds ?? null, expiresAt });
      await audit.record(principal, 'token.create', `token:${row.id}`, { name: body.name, role: body.role, expiresAt: expiresAt.toISOString(), plantIds: body.plantIds ?? null });
      return { id: row.id, token: secret, expiresAt: expiresAt.toISOString() };
    },
    async revoke(principal: Actor, id: number): Promise<{ ok: true }> {
      if (!(await tokenRepo.revoke(principal.userId, id))) throw new NotFoundError(`no active token ${id} of yours`);
      await credentialsChanged({ tokenId: id });
      await audit.record(principal, 'token.revoke', `token:${id}`);
      return { ok: true };
    },
  };
}
export type TokenService = ReturnType<typeof createTokenService>;
