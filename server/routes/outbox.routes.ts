import { z } from 'zod';
import { services, type AppContext } from '../app-context.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';
import { outboxMessage, outboxSummary as summary } from '../../shared/contracts/outbox.ts';

const listQuery = z.strictObject({ limit: z.coerce.number().int().min(1).max(500).default(100), beforeId: z.coerce.number().int().positive().optional() });
const idParams = z.strictObject({ id: z.coerce.number().int().positive() });

/** The built-in mail catcher's messages (used when SMTP_URL is not set); admins only, since mails name recipients. */
export function outboxRoutes(ctx: AppContext): RouteDef[] {
  const { outbox } = services(ctx);
  return [
    defineRoute({
      method: 'get',
      path: '/outbox',
      role: 'admin',
      tag: 'mail',
      summary: 'Messages the built-in mail catcher received, newest first (?limit=, ?beforeId= to page)',
      query: listQuery,
      response: z.array(summary),
      handler: ({ query, principal }) => outbox.list(principal, query.limit, query.beforeId),
    }),
    defineRoute({
      method: 'get',
      path: '/outbox/:id',
      role: 'admin',
      tag: 'mail',
      summary: 'One caught message: decoded text and the raw message',
      params: idParams,
      response: outboxMessage,
      handler: ({ params, principal }) => outbox.get(principal, params.id),
    }),
  ];
}
