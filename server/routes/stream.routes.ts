import type { Request, Response } from 'express';
import { plantParams, streamQuery, STREAM_EVENTS, type PlantParams, type StreamEventName } from '../../shared/contracts/plant-api.ts';
import type { AppContext } from '../app-context.ts';
import type { RouteDef } from '../http/route.ts';
import { plantService } from '../services/plant.service.ts';
import { serveStream, streamHub } from '../services/stream.service.ts';

/** Live stream of a plant as Server-Sent Events (server/services/stream.service.ts has the wire details). */
export function streamRoutes(ctx: AppContext): RouteDef[] {
  const plants = plantService(ctx);
  const hub = streamHub(ctx);
  return [
    {
      method: 'get',
      path: '/plants/:plantId/stream',
      role: 'analyst',
      tag: 'plants',
      summary:
        'Server-Sent Events: event tag {tagId, ts, value, quality} for each changed live value, balance (a new balance computation), alarm (an alarm raised, acknowledged or cleared); `events=balance,alarm` narrows them. A comment `: ready` follows once the subscription is live, `: heartbeat` every 15 s. At most 5 streams per user or token (429 beyond)',
      params: plantParams,
      query: streamQuery,
      produces: 'text/event-stream',
      handler: async (req: Request, res: Response) => {
        const { plantId } = req.valid.params as PlantParams;
        await plants.requirePlant(req, plantId);
        const wanted = (req.valid.query as { events?: string }).events;
        const events = new Set<StreamEventName>(wanted ? (wanted.split(',') as StreamEventName[]) : STREAM_EVENTS);
        await serveStream(hub, req, res, plantId, events);
      },
    },
  ];
}
