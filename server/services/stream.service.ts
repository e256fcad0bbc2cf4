/**
 * Live stream fan-out for `GET /api/v1/plants/:plantId/stream` (Server-Sent Events, WHATWG HTML
 * Living Standard §9.2). Event names: `tag`, `balance`, `alarm`.
 *
 * Three ways in, one way out:
 *
 * 1. In this process: `streamHub(ctx).publish(plantId, event, data)`,
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
import type { Logger } from 'pino';
import { z } from 'zod';
import { STREAM_EVENTS, type StreamEventName } from '../../shared/contracts/plant-api.ts';
import type { AppContext } from '../app-context.ts';
import type { Principal } from '../auth/principal.ts';
import { TooManyRequestsError } from '../http/errors.ts';
import { plantRepository, type PlantRepository } from '../repositories/plant.repository.ts';
import { STREAM_CHANNEL, streamRepository, type StreamRepository } from '../repositories/stream.repository.ts';
import type { PlantAccess } from './plant.service.ts';

export { STREAM_CHANNEL, notifyStream } from '../repositories/stream.repository.ts';
// The SSE writer is HTTP and lives in server/http/sse.ts; re-exported for
// tests/integration/stream.test.ts, which imports it from here.
export { serveStream } from '../http/sse.ts';

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

export type StreamListener = (event: StreamEventName, data: unknown, id: number) => void;
type Listener = StreamListener;

export interface StreamHubDeps {
  streamRepo: Pick<StreamRepository, 'listen'>;
  plantRepo: Pick<PlantRepository, 'latestChangedSince'>;
  log: Pick<Logger, 'warn'>;
}

/** One admitted connection of a caller to a plant's stream: what the SSE writer needs, no HTTP in it. */
export interface StreamSession {
  plantId: number;
  events: ReadonlySet<StreamEventName>;
  /** Subscribes; resolves once the cross-process bridge listens. Returns the unsubscribe. */
  subscribe(listener: StreamListener): Promise<() => void>;
  /** Gives the connection slot back (idempotent). */
  release(): void;
  heartbeatMs: number;
  maxBufferedBytes: number;
  log: Pick<Logger, 'warn'>;
}
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
  private closeListen: (() => void) | null = null;
  private listening: Promise<void> | null = null;
  private reconnectTimer: NodeJS.Timeout | null = null;
  private readonly plants: StreamHubDeps['plantRepo'];
  private readonly streamRepo: StreamHubDeps['streamRepo'];
  readonly log: StreamHubDeps['log'];

  /** From its repositories and logger; an AppContext builds them on its database (tests/integration/stream.test.ts). */
  constructor(
    deps: StreamHubDeps | AppContext,
    readonly opts: StreamOptions = DEFAULT_STREAM_OPTIONS,
  ) {
    const d = 'db' in deps ? { streamRepo: streamRepository(deps.db.pool), plantRepo: plantRepository(deps.db.db, deps.db.pool), log: deps.log } : deps;
    this.plants = d.plantRepo;
    this.streamRepo = d.streamRepo;
    this.log = d.log;
  }

  /** Deliver to this process's subscribers of `plantId`. */
  publish(plantId: number, event: StreamEventName, data: unknown): void {
    const id = ++this.seq;
    for (const s of this.subs) {
      if (s.plantId !== plantId || !s.events.has(event)) continue;
      try {
        s.listener(event, data, id);
      } catch (err) {
        this.log.warn({ err }, 'stream listener failed');
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

  /** Admits `principal` (429 past the limits) to a plant's events; the plant check is the caller's. */
  open(principal: Principal, plantId: number, events: ReadonlySet<StreamEventName>): StreamSession {
    const release = this.admit(principal.tokenId ? `token:${principal.tokenId}` : `user:${principal.userId}`);
    return {
      plantId,
      events,
      subscribe: (listener) => this.subscribe(plantId, events, listener),
      release,
      heartbeatMs: this.opts.heartbeatMs,
      maxBufferedBytes: this.opts.maxBufferedBytes,
      log: this.log,
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
      try {
        const close = await this.streamRepo.listen(
          (payload) => this.onNotification(payload),
          (err) => this.onListenError(err),
        );
        if (this.subs.size === 0) {
          // Everyone left while we were connecting.
          close();
          this.listening = null;
          return;
        }
        this.closeListen = close;
      } catch (err) {
        this.log.warn({ err }, 'stream: LISTEN failed; events from other processes are not delivered until it reconnects');
        this.listening = null;
        this.scheduleReconnect();
      }
    })();
    return this.listening;
  }

  private onListenError(err: unknown): void {
    this.log.warn({ err }, 'stream: LISTEN connection lost');
    const c = this.closeListen;
    this.closeListen = null;
    this.listening = null;
    c?.();
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
    const c = this.closeListen;
    this.closeListen = null;
    this.listening = null;
    c?.();
  }

  private onNotification(payload: string | undefined): void {
    let parsed: unknown;
    try {
      parsed = JSON.parse(payload ?? '');
    } catch {
      this.log.warn({ payload: payload?.slice(0, 200) }, `stream: ${STREAM_CHANNEL} payload is not JSON; dropped`);
      return;
    }
    const r = streamNotification.safeParse(parsed);
    if (!r.success) {
      this.log.warn({ payload: payload?.slice(0, 200) }, `stream: ${STREAM_CHANNEL} payload is not {plantId, event, data}; dropped`);
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
      this.log.warn({ err, plantId }, 'stream: tag_latest poll failed');
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

/** The live stream of a plant for a caller: the plant check, then admission. */
export function createStreamService({ hub, plantAccess }: { hub: Pick<StreamHub, 'open'>; plantAccess: PlantAccess }) {
  return {
    async open(principal: Principal, plantId: number, events: ReadonlySet<StreamEventName>): Promise<StreamSession> {
      await plantAccess.requirePlant(principal, plantId);
      return hub.open(principal, plantId, events);
    },
  };
}
export type StreamService = ReturnType<typeof createStreamService>;
