import pg from 'pg';
import type { Logger } from 'pino';

/**
 * LISTEN on one channel over a connection of its own (a pooled connection would be handed to
 * other queries), re-established after a loss with a growing delay. `onListening` runs after
 * every successful LISTEN, so the owner can catch up on what was announced while it was not
 * listening (NOTIFY is not queued for absent listeners: PostgreSQL documentation, NOTIFY).
 */
export class PgListener {
  private client: pg.Client | null = null;
  private timer: NodeJS.Timeout | null = null;
  private retryMs = 500;
  private closed = false;

  constructor(
    private url: string,
    private channel: string,
    private onPayload: (payload: string | undefined) => void,
    private onListening: () => void,
    private log: Logger,
  ) {
    void this.connect();
  }

  private async connect(): Promise<void> {
    if (this.closed) return;
    const c = new pg.Client({ connectionString: this.url, application_name: 'flocstream-ingest-listen' });
    this.client = c;
    c.on('notification', (n) => {
      if (n.channel === this.channel) this.onPayload(n.payload);
    });
    c.on('error', () => this.lost(c));
    c.on('end', () => this.lost(c));
    try {
      await c.connect();
      await c.query(`LISTEN ${c.escapeIdentifier(this.channel)}`);
      this.retryMs = 500;
      this.onListening();
    } catch (err) {
      this.log.warn({ err: (err as Error).message, channel: this.channel }, 'LISTEN failed; will retry');
      this.lost(c);
    }
  }

  private lost(c: pg.Client): void {
    if (this.client !== c) return;
    this.client = null;
    void c.end().catch(() => {});
    if (this.closed || this.timer) return;
    this.timer = setTimeout(() => {
      this.timer = null;
      void this.connect();
    }, this.retryMs);
    this.retryMs = Math.min(this.retryMs * 2, 10_000);
  }

  async close(): Promise<void> {
    this.closed = true;
    if (this.timer) clearTimeout(this.timer);
    const c = this.client;
    this.client = null;
    await c?.end().catch(() => {});
  }
}
