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
        'Ingest workers: running (a worker whose heartbeat row is younger than three of its periods, else running:false with the reason and the last figures), samples/s, receive→commit lag [ms], spool size, writer counters, connection state per source, dead letters in the last hour and in total, and each worker (host, pid, heartbeat)',
      response: ingestStatusOut,
      handler: ({ principal }) => svc.status(principal),
    }),
  ];
}
