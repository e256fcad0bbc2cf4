import fs from 'node:fs';
import net from 'node:net';
import os from 'node:os';
import path from 'node:path';
import { Aedes } from 'aedes';
import pg from 'pg';
import pino from 'pino';
import { acceptConnection } from '../../../server/broker/embedded-broker.ts';
import { IndexedMemoryPersistence } from '../../../server/broker/indexed-persistence.ts';
import type { IngestConfig } from '../../../ingest/config.ts';
import type { IngestService } from '../../../ingest/ingest-service.ts';
import { waitFor as waitUntil } from '../../helpers/wait.ts';
export { freePort } from '../../helpers/net.ts';

export const silentLog = pino({ level: 'silent' });

export function tempDir(prefix: string): string {
  return fs.mkdtempSync(path.join(os.tmpdir(), `flocstream-${prefix}-`));
}

export function ingestConfig(databaseUrl: string, dataDir: string, over: Partial<IngestConfig> = {}): IngestConfig {
  return { databaseUrl, dataDir, logLevel: 'silent', batchRows: 5_000, writers: 2, flushMs: 100, retentionDays: 400, reloadMs: 500, statusMs: 500, mqttClientIdPrefix: 'it-ingest', mqttTrace: false, ...over };
}

/**
 * An aedes broker whose persistence (sessions, subscriptions, queued QoS 1 messages) outlives
 * `restart()`, like a broker with durable storage. aedes' default persistence is in memory, so
 * a plain restart of the embedded broker would lose messages it had already acknowledged to
 * the publisher; this keeps the test about ingest, not about broker storage.
 */
export interface TestBroker {
  url: string;
  port: number;
  broker: Aedes;
  stop(): Promise<void>;
  /** Stops the broker, waits until `down()` holds (e.g. ingest has seen the connection go), starts it again on the same port and store. */
  restart(down: () => boolean | Promise<boolean>): Promise<void>;
  close(): Promise<void>;
}

export async function startTestBroker(port: number): Promise<TestBroker> {
  // The embedded broker's store (server/broker/indexed-persistence.ts), kept across restarts, and
  // its connection handling.
  let broker = await Aedes.createBroker({ persistence: new IndexedMemoryPersistence() } as Parameters<typeof Aedes.createBroker>[0]);
  // Not in aedes' typings, but the documented `persistence` option takes the same object.
  const persistence: unknown = (broker as unknown as { persistence: unknown }).persistence;
  let server: net.Server | null = null;
  const sockets = new Set<net.Socket>();
  const listen = async () => {
    // As the embedded broker does (server/broker/embedded-broker.ts), so the outage tests run on it.
    server = net.createServer((conn) => acceptConnection(broker, conn));
    server.on('connection', (s) => {
      sockets.add(s);
      s.on('close', () => sockets.delete(s));
    });
    await new Promise<void>((r) => server!.listen(port, '127.0.0.1', () => r()));
  };
  const stop = async () => {
    await new Promise<void>((r) => broker.close(() => r()));
    for (const s of sockets) s.destroy();
    await new Promise<void>((r) => (server ? server.close(() => r()) : r()));
    server = null;
  };
  await listen();
  const tb: TestBroker = {
    url: `mqtt://127.0.0.1:${port}`,
    port,
    get broker() {
      return broker;
    },
    stop,
    async restart(down) {
      await stop();
      await waitUntil(down, undefined, { what: 'the clients to see the broker down', timeout_ms: 15_000 });
      broker = await Aedes.createBroker({ persistence } as Parameters<typeof Aedes.createBroker>[0]);
      await listen();
    },
    close: stop,
  };
  return tb;
}

export async function seedWiring(url: string, opts: { kind: 'mqtt' | 'opcua'; sourceUrl: string; options?: object; addresses: string[]; tag?: Partial<Record<string, unknown>> }): Promise<{ sourceId: number; tagIds: number[] }> {
  const c = new pg.Client({ connectionString: url });
  await c.connect();
  try {
    const p = await c.query(`INSERT INTO plants (code, name) VALUES ('it', 'Integration plant') ON CONFLICT (code) DO UPDATE SET name = excluded.name RETURNING id`);
    const plantId = p.rows[0].id as number;
    const s = await c.query(`INSERT INTO sources (plant_id, name, kind, url, options) VALUES ($1, $2, $3, $4, $5) RETURNING id`, [
      plantId,
      `${opts.kind}-${Math.random().toString(36).slice(2, 8)}`,
      opts.kind,
      opts.sourceUrl,
      JSON.stringify(opts.options ?? {}),
    ]);
    const sourceId = s.rows[0].id as number;
    const tagIds: number[] = [];
    for (const [i, a] of opts.addresses.entries()) {
      const t = await c.query(
        `INSERT INTO tags (plant_id, source_id, name, address, unit, scale_gain, scale_offset, range_low, range_high, sampling_interval_ms)
         VALUES ($1, $2, $3, $4, 'g/L', $5, $6, $7, $8, $9) RETURNING id`,
        [plantId, sourceId, `S${sourceId}-T${i}`, a, opts.tag?.scaleGain ?? 1, opts.tag?.scaleOffset ?? 0, opts.tag?.rangeLow ?? null, opts.tag?.rangeHigh ?? null, opts.tag?.samplingInterval_ms ?? null],
      );
      tagIds.push(t.rows[0].id as number);
    }
    return { sourceId, tagIds };
  } finally {
    await c.end();
  }
}

/**
 * Polls `fn` until `ok` holds, with a deadline (tests/helpers/wait.ts); a probe that throws
 * counts as not yet (the database may be down on purpose).
 */
export async function waitFor<T>(what: string, fn: () => Promise<T>, ok: (v: T) => boolean, timeoutMs = 30_000, everyMs = 100): Promise<T> {
  const probe = async (): Promise<{ v: T } | { err: string }> => {
    try {
      return { v: await fn() };
    } catch (e) {
      return { err: (e as Error).message };
    }
  };
  const r = await waitUntil(probe, (x) => 'v' in x && ok(x.v), { what, timeout_ms: timeoutMs, every_ms: everyMs });
  return (r as { v: T }).v;
}

/**
 * Resolves once nothing is in flight between the broker and ingest: the broker's queue for
 * `clientId` is empty (every message it sent was acknowledged, none waits for a reconnect) and,
 * when `svc` is given, ingest holds no unacknowledged message and no unwritten row. A count read
 * after this is final; a duplicate still on its way would be in one of those places.
 */
export async function drained(broker: TestBroker, clientId: string, svc?: IngestService, timeoutMs = 20_000): Promise<void> {
  const store = (broker.broker as unknown as { persistence: IndexedMemoryPersistence }).persistence;
  await waitFor(
    `nothing in flight for ${clientId}`,
    async () => {
      const src = svc?.status().sources[0];
      return { queued: store.outgoingCount(clientId), unacknowledged: src?.unacknowledged ?? 0, backlog: svc?.writer.stats.backlog ?? 0 };
    },
    (x) => x.queued === 0 && x.unacknowledged === 0 && x.backlog === 0,
    timeoutMs,
    20,
  );
}

export async function scalar(pool: pg.Pool, sql: string, params: unknown[] = []): Promise<number> {
  const r = await pool.query(sql, params);
  return Number(Object.values(r.rows[0] ?? { n: 0 })[0]);
}
