import type { outboxReader } from '../mail/outbox.ts';

type OutboxReader = ReturnType<typeof outboxReader>;

/** The built-in mail catcher's messages (mail_outbox), for admins: the route's one service over the catcher's store. */
export function createOutboxService({ outbox }: { outbox: Pick<OutboxReader, 'list' | 'get'> }) {
  return {
    /** Newest first; `beforeId` pages. */
    list: (limit: number, beforeId?: number) => outbox.list(limit, beforeId),
    /** One message with its decoded text and raw source; 404 when there is none. */
    get: (id: number) => outbox.get(id),
  };
}
export type OutboxService = ReturnType<typeof createOutboxService>;
