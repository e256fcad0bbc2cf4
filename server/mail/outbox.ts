import { desc, eq, lt } from 'drizzle-orm';
import type { Db } from '../db/client.ts';
import { mailOutbox } from '../db/schema/index.ts';
import { NotFoundError } from '../http/errors.ts';

/** Reading the catcher's stored messages (mail_outbox), newest first. */
export function outboxReader(db: Db) {
  return {
    async list(limit: number, beforeId?: number) {
      const rows = await db
        .select({ id: mailOutbox.id, receivedAt: mailOutbox.receivedAt, from: mailOutbox.mailFrom, to: mailOutbox.rcptTo, subject: mailOutbox.subject, size: mailOutbox.size })
        .from(mailOutbox)
        .where(beforeId ? lt(mailOutbox.id, beforeId) : undefined)
        .orderBy(desc(mailOutbox.id))
        .limit(limit);
      return rows.map((r) => ({ ...r, receivedAt: r.receivedAt.toISOString() }));
    },
    async get(id: number) {
      const [r] = await db.select().from(mailOutbox).where(eq(mailOutbox.id, id));
      if (!r) throw new NotFoundError(`no message ${id} in the outbox`);
      return { id: r.id, receivedAt: r.receivedAt.toISOString(), from: r.mailFrom, to: r.rcptTo, subject: r.subject, size: r.size, text: r.text, raw: r.raw };
    },
  };
}
