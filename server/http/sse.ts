import type { Request, Response } from 'express';
import type { StreamEventName } from '../../shared/contracts/plant-api.ts';
import type { StreamHub, StreamSession } from '../services/stream.service.ts';

/**
 * Writes one admitted stream session as Server-Sent Events (WHATWG HTML Living Standard §9.2):
 * headers, `retry:`, events as `id/event/data`, heartbeat comments, `: ready` once the
 * subscription is live, and cleanup (unsubscribe, slot released) when the client goes away or
 * cannot keep up (more than `maxBufferedBytes` queued on its socket).
 */
export async function sendSse(req: Request, res: Response, session: StreamSession): Promise<void> {
  let closed = false;
  let unsubscribe: (() => void) | null = null;
  let heartbeat: NodeJS.Timeout | null = null;
  const close = () => {
    if (closed) return;
    closed = true;
    if (heartbeat) clearInterval(heartbeat);
    unsubscribe?.();
    session.release();
    if (!res.writableEnded) res.end();
  };
  req.on('close', close);
  res.on('error', close);
  // The client may have left while the route was still checking the plant: its 'close' event
  // has fired already and would never reach the listener above.
  if (req.destroyed || res.destroyed || req.socket.destroyed) {
    close();
    return;
  }

  res.status(200);
  res.setHeader('Content-Type', 'text/event-stream; charset=utf-8');
  res.setHeader('Cache-Control', 'no-cache, no-transform');
  res.setHeader('Connection', 'keep-alive');
  res.setHeader('X-Accel-Buffering', 'no');
  res.flushHeaders();
  req.socket.setNoDelay(true);

  const write = (chunk: string) => {
    if (closed) return;
    res.write(chunk);
    if (res.writableLength > session.maxBufferedBytes) {
      session.log.warn({ plantId: session.plantId }, 'stream: client too slow, disconnected');
      close();
    }
  };
  // retry: reconnection delay for EventSource clients [ms] (HTML §9.2.6).
  write(`retry: 5000\n\n`);
  const unsub = await session.subscribe((event, data, id) => write(`id: ${id}\nevent: ${event}\ndata: ${JSON.stringify(data ?? null)}\n\n`));
  if (closed) {
    unsub();
    return;
  }
  unsubscribe = unsub;
  heartbeat = setInterval(() => write(`: heartbeat ${new Date().toISOString()}\n\n`), session.heartbeatMs);
  write(`: ready\n\n`);
}

/** Admits the request's caller to `hub` (no plant check) and serves the stream: the route's path without the stream service. */
export async function serveStream(hub: StreamHub, req: Request, res: Response, plantId: number, events: ReadonlySet<StreamEventName>): Promise<void> {
  await sendSse(req, res, hub.open(req.principal!, plantId, events));
}
