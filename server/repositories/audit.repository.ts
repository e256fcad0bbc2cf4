import type { Db } from '../db/client.ts';
import { auditLog } from '../db/schema/index.ts';

export type NewAuditRow = typeof auditLog.$inferInsert;

/** The append-only audit log. */
export function auditRepository(db: Db) {
  return {
    async insert(row: NewAuditRow): Promise<void> {
      await db.insert(auditLog).values(row);
    },
  };
}
export type AuditRepository = ReturnType<typeof auditRepository>;
