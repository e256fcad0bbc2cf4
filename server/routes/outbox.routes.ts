import type { Request } from 'express';
import { z } from 'zod';
import type { AppContext } from '../app-context.ts';
import type { RouteDef } from '../http/route.ts';
import { outboxReader } from '../mail/outbox.ts';
import { outboxMessage, outboxSummary as summary } from '../../shared/contracts/outbox.ts';

const listQuery = z.strictObject({ limit: z.coerce.number().int().min(1).max(500).default(100), beforeId: z.coerce.number().int().positive().optional() });
const idParams = z.strictObject({ id: z.coerce.number().int().positive() });

/** The built-in mail catcher's messages (used when SMTP_URL is not set); admins only, since mails name recipients. */
export function outboxRoutes(ctx: AppContext): RouteDef[] {
  const reader = outboxReader(ctx.db.db);
  return [
    {
      method: 'get',
      path: '/outbox',
      role: 'admin',
      tag: 'mail',
      summary: 'Messages the built-in mail catcher received, newest first (?limit=, ?beforeId= to page)',
      query: listQuery,
      response: z.array(summary),
      handler: (req: Request) => {
        const q = req.valid.query as z.infer<typeof listQuery>;
        return reader.list(q.limit, q.beforeId);
      },
    },
    {
      method: 'get',
      path: '/outbox/:id',
      role: 'admin',
      tag: 'mail',
      summary: 'One caught message: decoded text and the raw message',
      params: idParams,
      response: outboxMessage,
      handler: (req: Request) => reader.get((req.valid.params as z.infer<typeof idParams>).id),
    },
  ];
}
