import type { Db } from '../db/client.ts';
import { notifications } from '../db/schema/index.ts';

/** Every mail attempt with its status (sent, failed, skipped), so a failed delivery is visible. */
export function notificationRepository(db: Db) {
  return {
    async record(kind: string, recipients: string[], subject: string, status: string, details: Record<string, unknown> = {}): Promise<void> {
      await db.insert(notifications).values({ kind, recipients, subject, status, details });
    },
  };
}
export type NotificationRepository = ReturnType<typeof notificationRepository>;
