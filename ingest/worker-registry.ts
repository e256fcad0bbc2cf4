import { randomUUID } from 'node:crypto';
import os from 'node:os';
import type pg from 'pg';
import { INGEST_CHANNEL, type IngestEvent } from '../shared/contracts/ingest-events.ts';
import type { IngestStatus } from './ingest-service.ts';

/** Rows of workers silent this long are deleted (kept a day for a look at what a crash left). */
const FORGET_AFTER = '1 day';

/**
 * This worker's row in `ingest_workers` (server/db/schema/ingest.ts), keyed by an id chosen at
 * start, so any number of workers on any number of hosts share the table. Ingest's own SQL:
 * ingest imports nothing from server/.
 */
export class WorkerRegistry {
  readonly id = randomUUID();
  readonly host = os.hostname();
  readonly pid = process.pid;
  private announced = false;

  constructor(
    private pool: pg.Pool,
    readonly startedAt: Date,
    readonly heartbeat_ms: number,
  ) {}

  /**
   * Writes the row (insert on the first beat, and again if someone deleted it) with the
   * database's clock as heartbeat time; `stopped` marks a clean stop. The first beat and the
   * stop are announced on `flocstream_ingest`.
   */
  async beat(status: IngestStatus, stopped = false): Promise<void> {
    await this.pool.query(
      `INSERT INTO ingest_workers (id, host, pid, started_at, heartbeat_at, heartbeat_ms, stopped_at, status)
       VALUES ($1, $2, $3, $4, now(), $5, CASE WHEN $6 THEN now() END, $7)
       ON CONFLICT (id) DO UPDATE SET heartbeat_at = now(), heartbeat_ms = excluded.heartbeat_ms, stopped_at = excluded.stopped_at, status = excluded.status`,
      [this.id, this.host, this.pid, this.startedAt, this.heartbeat_ms, stopped, JSON.stringify(status)],
    );
    if (stopped) await this.notify({ event: 'worker', workerId: this.id, host: this.host, state: 'stopped' });
    else if (!this.announced) {
      this.announced = true;
      await this.notify({ event: 'worker', workerId: this.id, host: this.host, state: 'started' });
    }
  }

  async notify(e: IngestEvent): Promise<void> {
    await this.pool.query(`SELECT pg_notify($1, $2)`, [INGEST_CHANNEL, JSON.stringify(e)]);
  }

  /** Deletes the rows of workers (this one's peers, gone) silent for a day. */
  async pruneSilent(): Promise<number> {
    const r = await this.pool.query(`DELETE FROM ingest_workers WHERE heartbeat_at < now() - $1::interval`, [FORGET_AFTER]);
    return r.rowCount ?? 0;
  }
}
