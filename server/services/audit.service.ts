import type { Principal } from '../auth/principal.ts';
import type { AuditRepository } from '../repositories/audit.repository.ts';

/** Who did a write: a principal, with the client address when the call came over HTTP. */
export type Actor = Principal & { ip?: string | null };
/** An actor, a caller not signed in (only its address is known: a failed sign-in), or null for the system itself. */
export type AuditActor = Actor | { ip: string | null } | null;

export interface AuditLog {
  /**
   * Records one write: who (user and token), what (action, target, details), when (now, the
   * database clock), from where. Details must not contain secrets; callers pass only what an
   * auditor should read.
   */
  record(actor: AuditActor, action: string, target: string | null, details?: Record<string, unknown>): Promise<void>;
}

export function createAuditLog({ auditRepo }: { auditRepo: Pick<AuditRepository, 'insert'> }): AuditLog {
  return {
    record: (actor, action, target, details) => {
      const p = actor && 'userId' in actor ? actor : null;
      return auditRepo.insert({
        userId: p?.userId ?? null,
        tokenId: p?.tokenId ?? null,
        actor: p ? p.email + (p.tokenId ? ` (token ${p.tokenId})` : '') : 'system',
        action,
        target,
        details: details ?? null,
        ip: actor?.ip ?? null,
      });
    },
  };
}

