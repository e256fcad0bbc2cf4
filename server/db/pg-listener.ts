import pg from 'pg';
import type { Logger } from 'pino';

/**
 * One dedicated connection that LISTENs on the channels asked for and hands each NOTIFY payload
 * to its handlers — what the API's in-memory caches (credentials, live balance) rely on to hear
 * about changes made by other processes. PostgreSQL delivers a notification to every listening
 * session once the sending transaction commits (PostgreSQL manual, NOTIFY).
 *
 * A cache may only serve from memory while this connection is up: a change announced while it is
 * down is never delivered. So `onState(false)` fires on every loss (the caches empty themselves
 * and go to the database), and `onState(true)` once LISTEN is active again on every channel.
 * A connection of its own (not a pool client), so `Database.close()` is not held up by it; it is
 * ended from there through `stop()`.
 */
/** Its `application_name` in pg_stat_activity. */
export const LISTENER_APPLICATION_NAME = 'flocstream-listener';

export class PgListener {
  private client: pg.Client | null = null;
  private connecting: Promise<void> | null = null;
  private retry: NodeJS.Timeout | null = null;
  private stopped = false;
  private readonly handlers = new Map<string, Array<(payload: string) => void>>();
  private readonly stateHandlers = new Set<(up: boolean) => void>();
  up = false;

  constructor(
    private readonly url: string,
    private readonly log: Logger,
    private readonly reconnectMs = 2000,
  ) {}

  /** Registers a handler for `channel` (a plain identifier) and connects if not yet done. */
  on(channel: string, handler: (payload: string) => void): void {
    if (!/^[a-z_][a-z0-9_]*$/.test(channel)) throw new Error(`not a plain channel name: ${channel}`);
    const list = this.handlers.get(channel);
    if (list) list.push(handler);
    else {
      this.handlers.set(channel, [handler]);
      // A channel added while connected: listen on it too, reported as a short outage so no
      // cache trusts that channel before LISTEN is in effect.
      if (this.client) this.lost(new Error('channel added'), false);
    }
    void this.connect();
  }

  /** Called with true when LISTEN is active on every channel, false when that stops; returns the unsubscribe. */
  onState(handler: (up: boolean) => void): () => void {
    this.stateHandlers.add(handler);
    return () => this.stateHandlers.delete(handler);
  }

  private setUp(up: boolean): void {
    if (this.up === up) return;
    this.up = up;
    for (const h of this.stateHandlers) h(up);
  }

  private connect(): Promise<void> {
    if (this.stopped) return Promise.resolve();
    this.connecting ??= (async () => {
      const client = new pg.Client({ connectionString: this.url, application_name: LISTENER_APPLICATION_NAME });
      client.on('error', (err) => this.lost(err, true));
      client.on('notification', (m) => {
        for (const h of this.handlers.get(m.channel) ?? []) {
          try {
            h(m.payload ?? '');
          } catch (err) {
            this.log.warn({ err, channel: m.channel }, 'notification handler failed');
          }
        }
      });
      try {
        await client.connect();
        // Channels registered while this was connecting are picked up too (Map iteration sees them).
        for (const ch of this.handlers.keys()) await client.query(`LISTEN ${ch}`);
        if (this.stopped) {
          await client.end().catch(() => {});
          return;
        }
        this.client = client;
        client.on('end', () => this.lost(new Error('connection ended'), true));
        this.setUp(true);
      } catch (err) {
        await client.end().catch(() => {});
        this.log.warn({ err }, 'LISTEN connection failed; caches serve from the database until it is back');
        this.scheduleRetry();
      } finally {
        this.connecting = null;
      }
    })();
    return this.connecting;
  }

  private lost(err: unknown, warn: boolean): void {
    const c = this.client;
    this.client = null;
    this.setUp(false);
    if (c) {
      c.removeAllListeners('end');
      c.on('error', () => {});
      void c.end().catch(() => {});
    }
    if (this.stopped) return;
    if (warn) this.log.warn({ err }, 'LISTEN connection lost; caches serve from the database until it is back');
    if (warn) this.scheduleRetry();
    else void this.connect();
  }

  private scheduleRetry(): void {
    if (this.retry || this.stopped) return;
    this.retry = setTimeout(() => {
      this.retry = null;
      void this.connect();
    }, this.reconnectMs);
    this.retry.unref();
  }

  /** Waits until LISTEN is active (tests and benchmarks); rejects after `timeout_ms`. */
  async ready(timeout_ms = 10_000): Promise<void> {
    if (this.up) return;
    await new Promise<void>((resolve, reject) => {
      const t = setTimeout(() => {
        off();
        reject(new Error(`LISTEN not active after ${timeout_ms} ms`));
      }, timeout_ms);
      const off = this.onState((up) => {
        if (up) {
          clearTimeout(t);
          off();
          resolve();
        }
      });
      void this.connect();
    });
  }

  async stop(): Promise<void> {
    this.stopped = true;
    if (this.retry) clearTimeout(this.retry);
    await this.connecting?.catch(() => {});
    const c = this.client;
    this.client = null;
    this.setUp(false);
    if (c) {
      c.removeAllListeners('end');
      await c.end().catch(() => {});
    }
  }
}
