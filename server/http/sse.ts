import type { Request, Response } from 'express';
import type { StreamEventName } from '../../shared/contracts/plant-api.ts';
import type { StreamHub, StreamSession } from '../services/stream.service.ts';

/**
 * Writes one admitted stream session as Server-Sent Events (WHATWG HTML Living Standard §9.2):
 * headers, `retry:`, events as `id/event/data`, heartbeat comments, `: ready` once the
 * subscription is live, and cleanup (unsubscribe, slot released) when the client goes away or
 * cannot keep up (more than `maxBufferedBytes` queued on its socket).
 *
 * A stream outlives the check made when it opened, so its caller is checked again
 * (`req.credentialWatch`, server/auth/middleware.ts): at once when a credential change that
 * concerns it is announced (sign-out, token revoked, user changed or disabled — in this or another
 * API process, through NOTIFY), and every `recheckMs` in any case (expiry, a missed announcement).
 * A caller that no longer stands gets a last comment and the stream ends; EventSource's
 * reconnection then meets a 401.
 */
export const CREDENTIAL_RECHECK_MS = 10_000;

export async function sendSse(req: Request, res: Response, session: StreamSession, opts: { recheckMs?: number } = {}): Promise<void> {
  let closed = false;
  let unsubscribe: (() => void) | null = null;
  let heartbeat: NodeJS.Timeout | null = null;
  let recheckTimer: NodeJS.Timeout | null = null;
  let stopWatching: (() => void) | null = null;
  const close = () => {
    if (closed) return;
    closed = true;
    if (heartbeat) clearInterval(heartbeat);
    if (recheckTimer) clearInterval(recheckTimer);
    stopWatching?.();
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
  const watch = req.credentialWatch;
  if (watch) {
    let checking = false;
    // A change announced while a check runs may postdate what that check read: check again after it.
    let again = false;
    const recheck = () => {
      if (closed) return;
      if (checking) {
        again = true;
        return;
      }
      checking = true;
      watch
        .recheck()
        .then((ok) => {
          if (ok) return;
          write(`: credentials revoked\n\n`);
          close();
        })
        // A failed check (database unreachable) keeps the stream; the next one decides.
        .catch((err: unknown) => session.log.warn({ err }, 'stream: credential re-check failed'))
        .finally(() => {
          checking = false;
          if (again) {
            again = false;
            recheck();
          }
        });
    };
    stopWatching = watch.onChange(recheck);
    recheckTimer = setInterval(recheck, opts.recheckMs ?? CREDENTIAL_RECHECK_MS);
    recheckTimer.unref();
  }
  write(`: ready\n\n`);
}

/** Admits the request's caller to `hub` (no plant check) and serves the stream: the route's path without the stream service. */
export async function serveStream(hub: StreamHub, req: Request, res: Response, plantId: number, events: ReadonlySet<StreamEventName>): Promise<void> {
  await sendSse(req, res, hub.open(req.principal!, plantId, events));
}
