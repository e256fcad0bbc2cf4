import { spawn, type ChildProcess } from 'node:child_process';
import path from 'node:path';
import mqtt, { type MqttClient } from 'mqtt';
import pg from 'pg';
import { afterAll, describe, expect, it } from 'vitest';
import { IngestService } from '../../../ingest/ingest-service.ts';
import { startLocalPostgres, type LocalPostgres } from '../../../server/db/local-postgres.ts';
import { runMigrations } from '../../../server/db/migrate.ts';
import { createTestDatabase } from '../../helpers/db.ts';
import { drained, freePort, ingestConfig, scalar, seedWiring, silentLog, startTestBroker, tempDir, waitFor } from './helpers.ts';

const TAGS = 10;
const ROOT = path.resolve(import.meta.dirname, '../../..');

function message(k: number, t0: number): [string, string] {
  return [`o/tag${k % TAGS}`, JSON.stringify({ v: k, ts: new Date(t0 + Math.floor(k / TAGS) * 10).toISOString() })];
}

/** Publishes messages [from, to) in windows of 500, each window's PUBACKs awaited before the next (the broker paces the stream). */
async function publishRange(c: MqttClient, from: number, to: number, t0: number): Promise<void> {
  for (let i = from; i < to; i += 500) {
    await Promise.all(
      Array.from({ length: Math.min(500, to - i) }, (_, j) => {
        const [topic, p] = message(i + j, t0);
        return c.publishAsync(topic, p, { qos: 1 });
      }),
    );
  }
}

describe('outages', () => {
  const cleanups: (() => Promise<void> | void)[] = [];
  afterAll(async () => {
    for (const f of cleanups.reverse()) await Promise.resolve(f()).catch(() => {});
  });

  it('PostgreSQL stopped and started mid-stream: exactly N rows, no duplicates, rollups exact', async () => {
    // A cluster of its own, so stopping it does not disturb the shared test cluster.
    const pgDir = tempDir('pg-outage');
    const pgPort = await freePort();
    let cluster: LocalPostgres = await startLocalPostgres({ dataDir: pgDir, port: pgPort });
    cleanups.push(() => cluster.stop());
    await runMigrations(cluster.url);
    const url = cluster.url;
    const broker = await startTestBroker(await freePort());
    cleanups.push(() => broker.close());
    const { tagIds } = await seedWiring(url, { kind: 'mqtt', sourceUrl: broker.url, options: { topics: ['o/#'] }, addresses: Array.from({ length: TAGS }, (_, i) => `o/tag${i}`) });
    const dataDir = tempDir('ingest-pg-outage');
    const svc = await IngestService.start(ingestConfig(url, dataDir), silentLog);
    cleanups.push(() => svc.stop());
    await waitFor('connected', async () => svc.status().sources[0]?.state, (s) => s === 'connected');
    const pub = await mqtt.connectAsync(broker.url, { clientId: 'outage-pub', clean: false, protocolVersion: 4 });
    cleanups.push(() => pub.endAsync());

    const N = 20_000;
    const t0 = Date.UTC(2026, 1, 1);
    await publishRange(pub, 0, 5_000, t0);
    cluster.stop();
    // Publishing goes on while the database is down: acknowledgements now come from the spool.
    await publishRange(pub, 5_000, 12_000, t0);
    await waitFor('spooled', async () => svc.writer.stats.spooledSamples, (n) => n > 0, 10_000);
    expect(svc.writer.stats.dbState).toBe('down');
    cluster = await startLocalPostgres({ dataDir: pgDir, port: pgPort });
    await publishRange(pub, 12_000, N, t0);

    const pool = new pg.Pool({ connectionString: url, max: 2 });
    cleanups.push(() => pool.end());
    const range = [tagIds, new Date(t0), new Date(t0 + 86_400_000)];
    await waitFor('N rows after the outage', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`, range), (n) => n >= N, 30_000);
    await drained(broker, `it-ingest-${svc.status().sources[0]!.sourceId}`, svc, 30_000);
    expect(await scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`, range)).toBe(N);
    expect(await scalar(pool, `SELECT count(DISTINCT value) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`, range)).toBe(N);
    expect(await scalar(pool, `SELECT sum(count) FROM rollup_1m WHERE tag_id = ANY($1) AND bucket >= $2 AND bucket < $3`, range)).toBe(N);
    expect(svc.writer.stats.spooledSamples).toBeGreaterThan(0);
    await waitFor('spool drained', async () => svc.writer.spoolBytes, (b) => b === 0, 10_000);
    expect(svc.writer.stats.dbState).toBe('up');
  });

  it('SIGKILL of the ingest process loses nothing it acknowledged', async () => {
    const t = await createTestDatabase();
    cleanups.push(() => t.drop());
    const broker = await startTestBroker(await freePort());
    cleanups.push(() => broker.close());
    const { tagIds } = await seedWiring(t.url, { kind: 'mqtt', sourceUrl: broker.url, options: { topics: ['o/#'] }, addresses: Array.from({ length: TAGS }, (_, i) => `o/tag${i}`) });
    const dataDir = tempDir('ingest-kill');
    const clientId = `kill-${tagIds[0]}`;
    // Record, at the broker, every message the ingest process acknowledged.
    const acked = new Set<number>();
    (broker.broker as unknown as NodeJS.EventEmitter).on('ack', (packet: { payload?: Buffer } | undefined, client: { id: string } | undefined) => {
      if (client?.id.startsWith(clientId) && packet?.payload) acked.add((JSON.parse(packet.payload.toString()) as { v: number }).v);
    });
    // aedes announces each SUBSCRIBE it has stored: messages published after it reach ingest.
    let subscribed = false;
    (broker.broker as unknown as NodeJS.EventEmitter).on('subscribe', (_subs: unknown, client: { id: string } | undefined) => {
      if (client?.id.startsWith(clientId)) subscribed = true;
    });
    const spawnIngest = (): ChildProcess => {
      // `node --import tsx`: one process, so SIGKILL hits ingest itself (the tsx CLI would run it
      // in a child that survives the parent's SIGKILL).
      const child = spawn(process.execPath, ['--import', 'tsx', 'ingest/main.ts'], {
        cwd: ROOT,
        env: { ...process.env, DATABASE_URL: t.url, FLOCSTREAM_DATA_DIR: dataDir, INGEST_MQTT_CLIENT_ID: clientId, LOG_LEVEL: 'warn', INGEST_FLUSH_MS: '150' },
        stdio: ['ignore', 'inherit', 'inherit'],
      });
      cleanups.push(() => {
        if (child.exitCode === null) child.kill('SIGKILL');
      });
      return child;
    };
    let child = spawnIngest();
    const pool = new pg.Pool({ connectionString: t.url, max: 2 });
    cleanups.push(() => pool.end());
    await waitFor('ingest subscribed', async () => subscribed, (x) => x, 30_000);
    const pub = await mqtt.connectAsync(broker.url, { clientId: 'kill-pub', clean: false, protocolVersion: 4 });
    cleanups.push(() => pub.endAsync());
    const N = 20_000;
    const t0 = Date.UTC(2026, 1, 2);
    await publishRange(pub, 0, 8_000, t0);
    await waitFor('some acknowledged', async () => acked.size, (n) => n > 1_000, 10_000);
    child.kill('SIGKILL');
    await new Promise<void>((r) => child.once('exit', () => r()));
    const ackedAtKill = [...acked];
    await publishRange(pub, 8_000, 14_000, t0);
    child = spawnIngest();
    await publishRange(pub, 14_000, N, t0);

    const range = [tagIds, new Date(t0), new Date(t0 + 86_400_000)];
    await waitFor('N rows after restart', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`, range), (n) => n >= N, 40_000);
    const stored = await pool.query(`SELECT value FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3 AND value = ANY($4::float8[])`, [...range, ackedAtKill]);
    expect(ackedAtKill.length).toBeGreaterThan(1_000);
    expect(stored.rows.length).toBe(ackedAtKill.length);
    expect(await scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = ANY($1) AND ts >= $2 AND ts < $3`, range)).toBe(N);
    child.kill('SIGTERM');
    await new Promise<void>((r) => child.once('exit', () => r()));
    expect(child.exitCode).toBe(0);
  });
});
