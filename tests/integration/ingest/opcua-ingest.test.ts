import { randomBytes, X509Certificate } from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import { DataType, OPCUACertificateManager, OPCUAServer, StatusCodes, type StatusCode, type UAVariable } from 'node-opcua';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { IngestService } from '../../../ingest/ingest-service.ts';
import type { AppContext } from '../../../server/app-context.ts';
import { loadConfig } from '../../../server/config.ts';
import { openDatabase } from '../../../server/db/client.ts';
import { createOpcuaBrowseService } from '../../../server/services/opcua-browse.service.ts';
import { QUALITY_FLAG, qualityFlags, qualityGrade } from '../../../shared/contracts/sample-quality.ts';
import { createTestDatabase, type TestDatabase } from '../../helpers/db.ts';
import { freePort, ingestConfig, scalar, seedWiring, silentLog, tempDir, waitFor } from './helpers.ts';

describe('OPC UA → PostgreSQL', () => {
  let t: TestDatabase;
  let pool: pg.Pool;
  let server: OPCUAServer;
  let svc: IngestService;
  let level: UAVariable;
  let flow: UAVariable;
  let tagIds: number[];
  let endpoint: string;
  const dataDir = tempDir('opcua-it');

  beforeAll(async () => {
    t = await createTestDatabase();
    pool = new pg.Pool({ connectionString: t.url, max: 2 });
    const port = await freePort();
    const pki = path.join(dataDir, 'pki', 'test-server');
    server = new OPCUAServer({
      port,
      host: '127.0.0.1',
      hostname: '127.0.0.1',
      resourcePath: '/it',
      serverCertificateManager: new OPCUACertificateManager({ rootFolder: path.join(pki, 'server'), automaticallyAcceptUnknownCertificate: true }),
      userCertificateManager: new OPCUACertificateManager({ rootFolder: path.join(pki, 'user'), automaticallyAcceptUnknownCertificate: true }),
    });
    await server.initialize();
    const ns = server.engine.addressSpace!.getOwnNamespace();
    const folder = ns.addFolder(server.engine.addressSpace!.rootFolder.objects, { browseName: 'IT' });
    level = ns.addVariable({ componentOf: folder, browseName: 'Level', nodeId: 's=IT.Level', dataType: 'Double', minimumSamplingInterval: 50 });
    flow = ns.addVariable({ componentOf: folder, browseName: 'Flow', nodeId: 's=IT.Flow', dataType: 'Double', minimumSamplingInterval: 50 });
    level.setValueFromSource({ dataType: DataType.Double, value: 1 }, StatusCodes.Good, new Date(Date.UTC(2026, 2, 1, 0, 0, 0)));
    flow.setValueFromSource({ dataType: DataType.Double, value: 10 }, StatusCodes.Good, new Date(Date.UTC(2026, 2, 1, 0, 0, 0)));
    await server.start();
    endpoint = `opc.tcp://127.0.0.1:${port}/it`;
    const seeded = await seedWiring(t.url, {
      kind: 'opcua',
      sourceUrl: endpoint,
      options: { securityMode: 'SignAndEncrypt', securityPolicy: 'Basic256Sha256', acceptUnknownServerCertificate: true, publishingInterval_ms: 100 },
      addresses: ['ns=1;s=IT.Level', 'ns=1;s=IT.Flow'],
      tag: { scaleGain: 2, scaleOffset: 0.5, rangeLow: 0, rangeHigh: 100, samplingInterval_ms: 50 },
    });
    tagIds = seeded.tagIds;
    svc = await IngestService.start(ingestConfig(t.url, dataDir), silentLog);
  });

  afterAll(async () => {
    await svc?.stop();
    await server?.shutdown(0);
    await pool?.end();
    await t?.drop();
  });

  it('stores values with their source timestamps and maps StatusCodes to quality (SignAndEncrypt)', async () => {
    await waitFor('opcua connected', async () => svc.status().sources[0]?.state, (s) => s === 'connected', 30_000);
    await waitFor('initial values', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = ANY($1)`, [tagIds]), (n) => n >= 2, 15_000);
    const base = Date.UTC(2026, 2, 1, 1, 0, 0);
    const steps: [number, number, StatusCode][] = [
      [base + 1_000, 3, StatusCodes.Good],
      [base + 2_000, 4, StatusCodes.UncertainLastUsableValue],
      [base + 3_000, 5, StatusCodes.BadSensorFailure],
      [base + 4_000, 70, StatusCodes.Good], // 70 × 2 + 0.5 = 140.5 > rangeHigh 100
    ];
    for (const [ts, v, sc] of steps) {
      level.setValueFromSource({ dataType: DataType.Double, value: v }, sc, new Date(ts));
      // Each change stored before the next is made, so the subscription's sampling never merges two.
      await waitFor(`sample at ${new Date(ts).toISOString()}`, () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1 AND ts = $2`, [tagIds[0], new Date(ts)]), (n) => n === 1, 15_000);
      if (ts === base + 3_000) {
        // A restarted server's "no reading yet" (BadWaitingForInitialData) is received, counted
        // as suppressed and not stored: it says nothing of the process (the check below finds
        // only the four samples of `steps`).
        const before = svc.status().sources[0]!.suppressed;
        level.setValueFromSource({ dataType: DataType.Double, value: 0 }, StatusCodes.BadWaitingForInitialData, new Date(base + 3_500));
        await waitFor('the waiting-for-data status received', async () => svc.status().sources[0]!.suppressed, (n) => n === before + 1, 15_000);
      }
    }
    const q = `SELECT (extract(epoch FROM ts) * 1000)::float8 ms, value, quality FROM samples WHERE tag_id = $1 AND ts >= $2 ORDER BY ts`;
    const rows = await waitFor('four samples', async () => (await pool.query(q, [tagIds[0], new Date(base)])).rows, (r) => r.length === 4, 15_000);
    expect(rows.map((r) => r.ms)).toEqual(steps.map((s) => s[0]));
    expect(rows[0]).toMatchObject({ value: 6.5, quality: 0 });
    expect(qualityGrade(rows[1].quality)).toBe('uncertain');
    expect(rows[1].quality & QUALITY_FLAG.sourceStatus).not.toBe(0);
    expect(rows[1].value).toBe(8.5);
    expect(qualityGrade(rows[2].quality)).toBe('bad');
    expect(rows[2].value).toBeNull();
    expect(qualityGrade(rows[3].quality)).toBe('uncertain');
    expect(qualityFlags(rows[3].quality)).toEqual(['outOfRange']);
    // The Bad sample is not in the rollup; tag_latest has the newest.
    expect(await scalar(pool, `SELECT sum(count) FROM rollup_1m WHERE tag_id = $1 AND bucket >= $2`, [tagIds[0], new Date(base)])).toBe(3);
    const latest = await pool.query(`SELECT value FROM tag_latest WHERE tag_id = $1`, [tagIds[0]]);
    expect(latest.rows[0].value).toBe(140.5);
    const st = svc.status().sources[0]!;
    expect(st.details.securityMode).toBe('SignAndEncrypt');
    // The client's PKI is under the data folder, not the home folder.
    expect(fs.existsSync(path.join(dataDir, 'pki', 'opcua-client', 'own', 'certs', 'client_certificate.pem'))).toBe(true);
  });

  it("the API's connection test and browse present ingest's client certificate, also from another data folder (another host)", async () => {
    await waitFor('opcua connected', async () => svc.status().sources[0]?.state, (s) => s === 'connected', 30_000);
    const ingestThumbprint = svc.status().sources[0]!.details.clientCertificateThumbprint as string;
    expect(ingestThumbprint).toMatch(/^[0-9a-f]{40}$/);
    // An API process with its own data folder and the same database, as on a second host.
    const apiDataDir = tempDir('opcua-api');
    const db = openDatabase(t.url, { max: 2 });
    const ctx: AppContext = { db, config: loadConfig({ FLOCSTREAM_DATA_DIR: apiDataDir, DATABASE_URL: t.url, FLOCSTREAM_DEMO: '0' }), log: silentLog, sessionKey: randomBytes(32) };
    try {
      const source = { url: endpoint, username: null, secret: null, options: { securityMode: 'SignAndEncrypt', securityPolicy: 'Basic256Sha256', acceptUnknownServerCertificate: true } };
      const probe = createOpcuaBrowseService({ pool: ctx.db.pool, dataDir: ctx.config.dataDir });
      const tested = await probe.test(source);
      expect(tested, JSON.stringify(tested)).toMatchObject({ ok: true, details: { clientCertificateThumbprint: ingestThumbprint } });
      const browsed = await probe.browse(source, undefined);
      expect(browsed.children.map((c) => c.browseName)).toContain('1:IT');
      // The server met one client certificate in all: the one ingest and the API share (its
      // thumbprint is the SHA-1 of the DER certificate, OPC 10000-4 §7.2 / §7.36).
      const trusted = path.join(dataDir, 'pki', 'test-server', 'server', 'trusted', 'certs');
      const seen = fs.readdirSync(trusted).map((f) => new X509Certificate(fs.readFileSync(path.join(trusted, f))).fingerprint.replaceAll(':', '').toLowerCase());
      expect(seen).toEqual([ingestThumbprint]);
      expect(fs.readFileSync(path.join(apiDataDir, 'pki', 'opcua-client', 'own', 'certs', 'client_certificate.pem'), 'utf8')).toBe(
        fs.readFileSync(path.join(dataDir, 'pki', 'opcua-client', 'own', 'certs', 'client_certificate.pem'), 'utf8'),
      );
    } finally {
      await db.close();
    }
  });
});
