import path from 'node:path';
import { DataType, OPCUACertificateManager, OPCUAServer, StatusCodes, type UAVariable } from 'node-opcua';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { LEASE_HEARTBEATS } from '../../../ingest/source-leases.ts';
import { ingestWorkerStatus } from '../../../shared/contracts/wiring.ts';
import { createTestDatabase, type TestDatabase } from '../../helpers/db.ts';
import { spawnIngestWorker, type IngestWorkerProcess } from '../../helpers/ingest-worker.ts';
import { freePort, scalar, seedWiring, tempDir, waitFor } from './helpers.ts';

/** Heartbeat of both workers [ms]; a lease lasts LEASE_HEARTBEATS of them. */
const STATUS_MS = 1_000;
/** The server writes a new value this often [ms] (each with its own source timestamp). */
const WRITE_MS = 200;

/**
 * Two ingest worker processes and one OPC UA source: exactly one worker holds the source's
 * lease. The holder is SIGKILLed; the other takes the lease once it expires (three heartbeats
 * after the holder's last renewal) and reads back, from the server's history (HistoryRead,
 * OPC 10000-11 §6.4.3), what the server recorded meanwhile. The test server (node-opcua's
 * in-memory historian on the variable, `installHistoricalDataNode`) keeps every value, so the
 * stored series must hold every value written, none missing and none twice.
 */
describe('ingest scale-out: an OPC UA source leased across two worker processes', () => {
  let t: TestDatabase;
  let pool: pg.Pool;
  let server: OPCUAServer;
  let level: UAVariable;
  let sourceId: number;
  let tagId: number;
  const workers: IngestWorkerProcess[] = [];
  const dir = tempDir('scale-opcua');

  beforeAll(async () => {
    t = await createTestDatabase();
    pool = new pg.Pool({ connectionString: t.url, max: 2 });
    const port = await freePort();
    const pki = path.join(dir, 'pki', 'test-server');
    server = new OPCUAServer({
      port,
      host: '127.0.0.1',
      hostname: '127.0.0.1',
      resourcePath: '/so',
      serverCertificateManager: new OPCUACertificateManager({ rootFolder: path.join(pki, 'server'), automaticallyAcceptUnknownCertificate: true }),
      userCertificateManager: new OPCUACertificateManager({ rootFolder: path.join(pki, 'user'), automaticallyAcceptUnknownCertificate: true }),
    });
    await server.initialize();
    const space = server.engine.addressSpace!;
    const ns = space.getOwnNamespace();
    const folder = ns.addFolder(space.rootFolder.objects, { browseName: 'SO' });
    level = ns.addVariable({ componentOf: folder, browseName: 'Level', nodeId: 's=SO.Level', dataType: 'Double', minimumSamplingInterval: 50 });
    // Historizing = true and every value kept (OPC 10000-11 §5.2.2 Historizing).
    space.installHistoricalDataNode(level, { maxOnlineValues: 100_000 });
    level.setValueFromSource({ dataType: DataType.Double, value: 0 }, StatusCodes.Good, new Date());
    await server.start();
    const seeded = await seedWiring(t.url, {
      kind: 'opcua',
      sourceUrl: `opc.tcp://127.0.0.1:${port}/so`,
      options: { securityMode: 'None', securityPolicy: 'None', acceptUnknownServerCertificate: true, publishingInterval_ms: 100 },
      addresses: ['ns=1;s=SO.Level'],
      tag: { samplingInterval_ms: 50 },
    });
    sourceId = seeded.sourceId;
    tagId = seeded.tagIds[0]!;
    for (const name of ['a', 'b']) {
      workers.push(spawnIngestWorker({ DATABASE_URL: t.url, FLOCSTREAM_DATA_DIR: path.join(dir, name), INGEST_STATUS_MS: String(STATUS_MS) }));
    }
  });

  afterAll(async () => {
    for (const w of workers) await w.stop();
    await server?.shutdown(0);
    await pool?.end();
    await t?.drop();
  });

  it('the other worker takes the lease within three heartbeats of the kill and the stored series has no gap the server held', async () => {
    const holder = async () => (await pool.query<{ holder: string; pid: number }>(`SELECT l.holder, w.pid FROM source_leases l JOIN ingest_workers w ON w.id = l.holder WHERE l.source_id = $1 AND l.mqtt_client_id = ''`, [sourceId])).rows[0];
    const first = await waitFor('one worker holding the source', holder, (h) => h !== undefined, 60_000, 100);
    expect(await scalar(pool, `SELECT count(*) FROM source_leases WHERE source_id = $1`, [sourceId])).toBe(1);
    await waitFor('the holder storing the server’s value', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1`, [tagId]), (n) => n >= 1, 60_000, 100);
    const stored0 = await scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1`, [tagId]);

    // The server records a new value every WRITE_MS; the workers see them live or read them back.
    const written: number[] = [];
    let value = 0;
    const write = () => {
      const ts = Date.now();
      value++;
      level.setValueFromSource({ dataType: DataType.Double, value }, StatusCodes.Good, new Date(ts));
      written.push(ts);
    };
    const timer = setInterval(write, WRITE_MS);
    try {
      await waitFor('ten values stored live', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1`, [tagId]), (n) => n >= stored0 + 10, 30_000, 100);
      const victim = workers.find((w) => w.pid === first!.pid)!;
      const survivor = workers.find((w) => w !== victim)!;
      const killedAt = Date.now();
      await victim.kill();
      const next = await waitFor('another worker holding the source', holder, (h) => h !== undefined && h.holder !== first!.holder, 30_000, 25);
      const takeover_ms = Date.now() - killedAt;
      const writtenInGap = written.filter((ts) => ts >= killedAt && ts <= killedAt + takeover_ms).length;
      console.log(`lease taken over ${takeover_ms} ms after the kill (heartbeat ${STATUS_MS} ms, lease ${LEASE_HEARTBEATS} heartbeats); ${writtenInGap} values written meanwhile`);
      expect(next!.pid).toBe(survivor.pid);
      // The lease ends three heartbeats after the victim's last renewal, so at most three after
      // the kill; the survivor tries again the moment it ends (plus this poll's 25 ms).
      expect(takeover_ms).toBeLessThanOrEqual(LEASE_HEARTBEATS * STATUS_MS + 500);
      expect(writtenInGap).toBeGreaterThanOrEqual(3);
      await waitFor('values stored live again', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1 AND ts > now() - interval '1 second'`, [tagId]), (n) => n >= 2, 30_000, 100);
    } finally {
      clearInterval(timer);
    }

    // Every value the server recorded is stored once, with its source timestamp and value.
    const rows = await waitFor(
      'every written value stored',
      async () => (await pool.query<{ ts: Date; value: number }>(`SELECT ts, value FROM samples WHERE tag_id = $1 AND ts >= $2 ORDER BY ts`, [tagId, new Date(written[0]!)])).rows,
      (r) => r.length >= written.length,
      30_000,
      200,
    );
    expect(rows.map((r) => r.ts.getTime())).toEqual(written);
    expect(rows.map((r) => r.value)).toEqual(written.map((_, i) => i + 1));
    // The gap came from the server's history, not from luck (the survivor's heartbeat row).
    const alive = workers.find((w) => w.proc.exitCode === null && w.proc.signalCode === null)!;
    const readBack = async () => {
      const st = ingestWorkerStatus.parse((await pool.query(`SELECT status FROM ingest_workers WHERE pid = $1`, [alive.pid])).rows[0].status);
      return (st.sources[0]?.details.readBack as { values: number; notHistorizing: number; error: string | null } | undefined) ?? null;
    };
    const rb = await waitFor('the survivor reporting its read-back', readBack, (r) => r !== null && r.values >= 3, 10_000, 200);
    expect(rb).toMatchObject({ notHistorizing: 0, error: null });
  }, 150_000);
});
