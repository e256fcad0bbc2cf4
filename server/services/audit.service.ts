import type { Request } from 'express';
import type { AppContext } from '../app-context.ts';
import { auditLog } from '../db/schema/index.ts';

/**
 * Records one write: who (user and token), what (action, target, details), when (now), from where.
 * Details must not contain secrets; callers pass only what an auditor should read.
 */
export async function audit(ctx: AppContext, req: Request | null, action: string, target: string | null, details?: Record<string, unknown>): Promise<void> {
  const p = req?.principal;
  await ctx.db.db.insert(auditLog).values({
    userId: p?.userId ?? null,
    tokenId: p?.tokenId ?? null,
    actor: p ? p.email + (p.tokenId ? ` (token ${p.tokenId})` : '') : 'system',
    action,
    target,
    details: details ?? null,
    ip: req?.ip ?? null,
  });
}
