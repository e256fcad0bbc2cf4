import { plantParams, streamQuery, STREAM_EVENTS, type StreamEventName } from '../../shared/contracts/plant-api.ts';
import { services, type AppContext } from '../app-context.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';
import { sendSse } from '../http/sse.ts';

/** Live stream of a plant as Server-Sent Events (server/services/stream.service.ts has the wire details). */
export function streamRoutes(ctx: AppContext): RouteDef[] {
  const { stream } = services(ctx);
  return [
    defineRoute({
      method: 'get',
      path: '/plants/:plantId/stream',
      role: 'analyst',
      tag: 'plants',
      summary:
        'Server-Sent Events: event tag {tagId, ts, value, quality} for each changed live value, balance (a new balance computation), alarm (an alarm raised, acknowledged or cleared); `events=balance,alarm` narrows them. A comment `: ready` follows once the subscription is live, `: heartbeat` every 15 s. At most 5 streams per user or token (429 beyond)',
      params: plantParams,
      query: streamQuery,
      produces: 'text/event-stream',
      handler: async ({ params, query, principal, req, res }) => {
        const events = new Set<StreamEventName>(query.events ? (query.events.split(',') as StreamEventName[]) : STREAM_EVENTS);
        await sendSse(req, res, await stream.open(principal, params.plantId, events));
      },
    }),
  ];
}
