/**
 * Live stream fan-out for `GET /api/v1/plants/:plantId/stream` (Server-Sent Events, WHATWG HTML
 * Living Standard §9.2). Event names: `tag`, `balance`, `alarm`.
 *
 * Three ways in, one way out:
 *
 * 1. In this process: `streamHub(ctx).publish(plantId, event, data)` (or `publish(ctx, …)`),
 *    delivered to this process's subscribers only.
 * 2. From any process on the same database (ingest, the balance job, another API process):
 *
 *        SELECT pg_notify('flocstream_stream', '{"plantId":1,"event":"balance","data":{…}}');
 *
 *    i.e. channel `flocstream_stream`, payload the JSON text of `{ plantId: integer > 0,
 *    event: "tag" | "balance" | "alarm", data: any JSON value }` (`notifyStream` below does it).
 *    PostgreSQL limits a payload to 8000 bytes and delivers it on commit of the sending
 *    transaction; a payload that does not parse or match that shape is logged and dropped. A
 *    process that notifies should not also call `publish` for the same event, or this process's
 *    clients get it twice.
 * 3. Tag values: while a plant has `tag` subscribers, `tag_latest` is polled about once a second
 *    and every changed row is sent as `{ tagId, ts, value, quality }` (ingest does not notify).
 *    The poll looks back a few seconds (a transaction's `received_at = now()` is its start time,
 *    so a slow commit can surface late) and drops rows it already sent.
 *
 * Resources exist only while someone listens: the LISTEN connection (one pool client, given
 * back when the last subscriber leaves) and one poll timer per plant. Limits per connection
 * owner (user or token) and in total are enforced by `admit`; a client that cannot keep up
 * (more than `maxBufferedBytes` queued on its socket) is disconnected instead of growing memory.
 */
import type { Request, Response } from 'express';
import type pg from 'pg';
import { z } from 'zod';
import { STREAM_EVENTS, type StreamEventName } from '../../shared/contracts/plant-api.ts';
import type { AppContext } from '../app-context.ts';
import { TooManyRequestsError } from '../http/errors.ts';
import { plantRepository } from '../repositories/plant.repository.ts';

export const STREAM_CHANNEL = 'flocstream_stream';

export const streamNotification = z.object({ plantId: z.number().int().positive(), event: z.enum(STREAM_EVENTS), data: z.unknown() });
export type StreamNotification = z.infer<typeof streamNotification>;

export interface StreamOptions {
  pollMs: number;
  /** Look-back of the tag_latest poll [ms]. */
  pollLookbackMs: number;
  heartbeatMs: number;
  maxPerOwner: number;
  maxTotal: number;
  maxBufferedBytes: number;
  /** Delay before the LISTEN bridge reconnects after losing its connection [ms]. */
  reconnectMs: number;
}
export const DEFAULT_STREAM_OPTIONS: StreamOptions = {
  pollMs: 1000,
  pollLookbackMs: 5000,
  heartbeatMs: 15_000,
  maxPerOwner: 5,
  maxTotal: 500,
  maxBufferedBytes: 1 << 20,
  reconnectMs: 2000,
};

type Listener = (event: StreamEventName, data: unknown, id: number) => void;
interface Sub {
  plantId: number;
  events: ReadonlySet<StreamEventName>;
  listener: Listener;
}
interface PlantPoll {
  timer: NodeJS.Timeout;
  busy: boolean;
  since: Date | null;
  /** tagId → "ts|receivedAt" of the last row sent. */
  sent: Map<number, string>;
}

export class StreamHub {
  private subs = new Set<Sub>();
  private owners = new Map<string, number>();
  private polls = new Map<number, PlantPoll>();
  private seq = 0;
  private listenClient: pg.PoolClient | null = null;
  private listening: Promise<void> | null = null;
  private reconnectTimer: NodeJS.Timeout | null = null;
  private readonly plants: ReturnType<typeof plantRepository>;

  constructor(
    readonly ctx: AppContext,
    readonly opts: StreamOptions = DEFAULT_STREAM_OPTIONS,
  ) {
    this.plants = plantRepository(ctx.db.db, ctx.db.pool);
  }

  /** Deliver to this process's subscribers of `plantId`. */
  publish(plantId: number, event: StreamEventName, data: unknown): void {
    const id = ++this.seq;
    for (const s of this.subs) {
      if (s.plantId !== plantId || !s.events.has(event)) continue;
      try {
        s.listener(event, data, id);
      } catch (err) {
        this.ctx.log.warn({ err }, 'stream listener failed');
      }
    }
  }

  get connections(): number {
    return this.subs.size;
  }

  /** Reserves a connection slot for `owner`; 429 past the limits. Returns the release function. */
  admit(owner: string): () => void {
    const n = this.owners.get(owner) ?? 0;
    if (n >= this.opts.maxPerOwner) throw new TooManyRequestsError(`at most ${this.opts.maxPerOwner} live streams per user or token; close one first`, 30);
    let total = 0;
    for (const v of this.owners.values()) total += v;
    if (total >= this.opts.maxTotal) throw new TooManyRequestsError('the server has as many live streams as it takes; retry later', 30);
    this.owners.set(owner, n + 1);
    let released = false;
    return () => {
      if (released) return;
      released = true;
      const m = (this.owners.get(owner) ?? 1) - 1;
      if (m <= 0) this.owners.delete(owner);
      else this.owners.set(owner, m);
    };
  }

  /**
   * Adds a subscriber; resolves once the cross-process bridge listens (or failed to — in-process
   * events still flow), so a caller can tell its client it is live. Returns the unsubscribe.
   */
  async subscribe(plantId: number, events: ReadonlySet<StreamEventName>, listener: Listener): Promise<() => void> {
    const sub: Sub = { plantId, events, listener };
    this.subs.add(sub);
    if (events.has('tag')) this.startPoll(plantId);
    await this.ensureListening();
    let done = false;
    return () => {
      if (done) return;
      done = true;
      this.subs.delete(sub);
      this.maybeStopPoll(plantId);
      if (this.subs.size === 0) this.stopListening();
    };
  }

  // ---- LISTEN/NOTIFY bridge ----
  private ensureListening(): Promise<void> {
    if (this.listening) return this.listening;
    this.listening = (async () => {
      let client: pg.PoolClient | null = null;
      try {
        client = await this.ctx.db.pool.connect();
        client.on('notification', (m) => this.onNotification(m.payload));
        client.on('error', (err) => this.onListenError(err));
        await client.query(`LISTEN ${STREAM_CHANNEL}`);
        if (this.subs.size === 0) {
          // Everyone left while we were connecting.
          client.release(true);
          this.listening = null;
          return;
        }
        this.listenClient = client;
      } catch (err) {
        client?.release(true);
        this.ctx.log.warn({ err }, 'stream: LISTEN failed; events from other processes are not delivered until it reconnects');
        this.listening = null;
        this.scheduleReconnect();
      }
    })();
    return this.listening;
  }

  private onListenError(err: unknown): void {
    this.ctx.log.warn({ err }, 'stream: LISTEN connection lost');
    const c = this.listenClient;
    this.listenClient = null;
    this.listening = null;
    c?.release(true);
    this.scheduleReconnect();
  }

  private scheduleReconnect(): void {
    if (this.reconnectTimer || this.subs.size === 0) return;
    this.reconnectTimer = setTimeout(() => {
      this.reconnectTimer = null;
      if (this.subs.size > 0) void this.ensureListening();
    }, this.opts.reconnectMs);
    this.reconnectTimer.unref();
  }

  private stopListening(): void {
    if (this.reconnectTimer) clearTimeout(this.reconnectTimer);
    this.reconnectTimer = null;
    const c = this.listenClient;
    this.listenClient = null;
    this.listening = null;
    // Destroyed rather than returned: a pooled connection must not keep its LISTEN.
    c?.release(true);
  }

  private onNotification(payload: string | undefined): void {
    let parsed: unknown;
    try {
      parsed = JSON.parse(payload ?? '');
    } catch {
      this.ctx.log.warn({ payload: payload?.slice(0, 200) }, `stream: ${STREAM_CHANNEL} payload is not JSON; dropped`);
      return;
    }
    const r = streamNotification.safeParse(parsed);
    if (!r.success) {
      this.ctx.log.warn({ payload: payload?.slice(0, 200) }, `stream: ${STREAM_CHANNEL} payload is not {plantId, event, data}; dropped`);
      return;
    }
    this.publish(r.data.plantId, r.data.event, r.data.data);
  }

  // ---- tag_latest poll ----
  private startPoll(plantId: number): void {
    if (this.polls.has(plantId)) return;
    const p: PlantPoll = { timer: setInterval(() => void this.poll(plantId, p), this.opts.pollMs), busy: false, since: null, sent: new Map() };
    p.timer.unref();
    this.polls.set(plantId, p);
    void this.poll(plantId, p);
  }

  private maybeStopPoll(plantId: number): void {
    for (const s of this.subs) if (s.plantId === plantId && s.events.has('tag')) return;
    const p = this.polls.get(plantId);
    if (p) clearInterval(p.timer);
    this.polls.delete(plantId);
  }

  private async poll(plantId: number, p: PlantPoll): Promise<void> {
    if (p.busy) return;
    p.busy = true;
    try {
      const first = p.since === null;
      const since = first ? new Date(0) : new Date(p.since!.getTime() - this.opts.pollLookbackMs);
      const rows = await this.plants.latestChangedSince(plantId, since);
      for (const r of rows) {
        const key = `${r.ts.getTime()}|${r.receivedAt.getTime()}`;
        if (p.sent.get(r.tagId) === key) continue;
        p.sent.set(r.tagId, key);
        if (p.since === null || r.receivedAt > p.since) p.since = r.receivedAt;
        // The first pass only learns what is there; clients read current values from GET …/tags.
        if (!first) this.publish(plantId, 'tag', { tagId: r.tagId, ts: r.ts.toISOString(), value: r.value, quality: r.quality });
      }
      if (p.since === null) p.since = new Date(0);
    } catch (err) {
      this.ctx.log.warn({ err, plantId }, 'stream: tag_latest poll failed');
    } finally {
      p.busy = false;
    }
  }
}

const hubs = new WeakMap<AppContext, StreamHub>();
/** The hub of this application context (one per running API). */
export function streamHub(ctx: AppContext): StreamHub {
  let h = hubs.get(ctx);
  if (!h) hubs.set(ctx, (h = new StreamHub(ctx)));
  return h;
}

/** In-process publish: `publish(ctx, plantId, 'balance', row)`. */
export function publish(ctx: AppContext, plantId: number, event: StreamEventName, data: unknown): void {
  streamHub(ctx).publish(plantId, event, data);
}

/** Cross-process publish through PostgreSQL (delivered when the caller's transaction commits). */
export async function notifyStream(db: pg.Pool | pg.ClientBase, plantId: number, event: StreamEventName, data: unknown): Promise<void> {
  await db.query('SELECT pg_notify($1, $2)', [STREAM_CHANNEL, JSON.stringify({ plantId, event, data })]);
}

/**
 * Serves one SSE connection: admission, headers, heartbeat comments, events, and cleanup when
 * the client goes away. Writes `: ready` once the subscription is live.
 */
export async function serveStream(hub: StreamHub, req: Request, res: Response, plantId: number, events: ReadonlySet<StreamEventName>): Promise<void> {
  const p = req.principal!;
  const release = hub.admit(p.tokenId ? `token:${p.tokenId}` : `user:${p.userId}`);
  let closed = false;
  let unsubscribe: (() => void) | null = null;
  let heartbeat: NodeJS.Timeout | null = null;
  const close = () => {
    if (closed) return;
    closed = true;
    if (heartbeat) clearInterval(heartbeat);
    unsubscribe?.();
    release();
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
    if (res.writableLength > hub.opts.maxBufferedBytes) {
      hub.ctx.log.warn({ plantId }, 'stream: client too slow, disconnected');
      close();
    }
  };
  // retry: reconnection delay for EventSource clients [ms] (HTML §9.2.6).
  write(`retry: 5000\n\n`);
  const unsub = await hub.subscribe(plantId, events, (event, data, id) => write(`id: ${id}\nevent: ${event}\ndata: ${JSON.stringify(data ?? null)}\n\n`));
  if (closed) {
    unsub();
    return;
  }
  unsubscribe = unsub;
  heartbeat = setInterval(() => write(`: heartbeat ${new Date().toISOString()}\n\n`), hub.opts.heartbeatMs);
  write(`: ready\n\n`);
}
