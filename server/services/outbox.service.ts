import type { Principal } from '../auth/principal.ts';
import { ForbiddenError } from '../http/errors.ts';
import type { outboxReader } from '../mail/outbox.ts';

type OutboxReader = ReturnType<typeof outboxReader>;

/**
 * The catcher's messages carry no plant: one outbox holds every plant's alarm mails and shift
 * summaries, with their recipients. A plant-scoped token would read other plants' mail and
 * recipients through it, so it is refused (403); only unscoped admins read the outbox.
 */
function assertUnscoped(principal: Pick<Principal, 'plantIds'>): void {
  if (principal.plantIds) throw new ForbiddenError('the outbox holds the mail of every plant; a plant-scoped token cannot read it');
}

/** The built-in mail catcher's messages (mail_outbox), for admins: the route's one service over the catcher's store. */
export function createOutboxService({ outbox }: { outbox: Pick<OutboxReader, 'list' | 'get'> }) {
  return {
    /** Newest first; `beforeId` pages. */
    list: async (principal: Pick<Principal, 'plantIds'>, limit: number, beforeId?: number) => {
      assertUnscoped(principal);
      return outbox.list(limit, beforeId);
    },
    /** One message with its decoded text and raw source; 404 when there is none. */
    get: async (principal: Pick<Principal, 'plantIds'>, id: number) => {
      assertUnscoped(principal);
      return outbox.get(id);
    },
  };
}
export type OutboxService = ReturnType<typeof createOutboxService>;
