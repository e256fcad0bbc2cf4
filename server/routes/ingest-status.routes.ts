import { services, type AppContext } from '../app-context.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';
import { ingestStatusOut } from '../../shared/contracts/wiring.ts';

/** Health of the ingest process, for the wiring view and scripts (analyst and up: it is read only). */
export function ingestStatusRoutes(ctx: AppContext): RouteDef[] {
  const svc = services(ctx).ingestStatus;
  return [
    defineRoute({
      method: 'get',
      path: '/ingest/status',
      role: 'analyst',
      tag: 'wiring',
      summary:
        'Ingest process: running (heartbeat at most 10 s old, else running:false with the reason and the last figures), samples/s, receive→commit lag [ms], spool size, writer counters, connection state per source, dead letters in the last hour and in total',
      response: ingestStatusOut,
      handler: ({ principal }) => svc.status(principal),
    }),
  ];
}
