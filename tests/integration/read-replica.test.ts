import { randomBytes } from 'node:crypto';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pg from 'pg';
import pino from 'pino';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { hashPassword } from '../../server/auth/passwords.ts';
import { loadConfig } from '../../server/config.ts';
import { startServer, type RunningServer } from '../../server/main.ts';
import { userRepository } from '../../server/repositories/user.repository.ts';
import { lsnValue } from '../../server/services/read-routing.service.ts';
import { createTestDatabase, testDataDir, type TestDatabase } from '../helpers/db.ts';
import { startStreamingReplica, type StreamingReplica } from '../helpers/replica.ts';
import { waitFor } from '../helpers/wait.ts';
import { seedFixturePlant, writeSignals } from './balance-fixture.ts';

const HOUR_MS = 3_600_000;

/**
 * Issue 18 item 5 against a real streaming replica (pg_basebackup -R of the test cluster, a hot
 * standby on a port of its own): with DATABASE_READ_URL the read routes answer from the replica
 * and say so in `x-flocstream-read`, writes go to the primary, and a caller's read after its own
 * write (a lab entry, a history import) goes to the primary until the replica's replay position
 * passes the write's. That a read really came from the replica is shown by pausing its replay
 * (pg_wal_replay_pause, PostgreSQL manual "Recovery Control Functions"): a row committed on the
 * primary then is missing from the replica's answer and appears once replay resumes.
 */
describe('read routes on a streaming replica', () => {
  let t: TestDatabase;
  let replica: StreamingReplica;
  let server: RunningServer;
  let dataDir: string;
  let primary: pg.Client;
  let standby: pg.Client;
  let plantId: number;
  let tagIds: Record<string, number>;
  const cookies: Record<'admin' | 'analyst', string> = { admin: '', analyst: '' };
  let adminId: number;

  /** Waits until the replica has replayed everything the primary had written when called. */
  async function caughtUp(): Promise<void> {
    const target = lsnValue((await primary.query<{ l: string }>('SELECT pg_current_wal_lsn()::text AS l')).rows[0]!.l);
    await waitFor(
      async () => (await standby.query<{ l: string }>('SELECT pg_last_wal_replay_lsn()::text AS l')).rows[0]!.l,
      (l) => lsnValue(l) >= target,
      { timeout_ms: 20_000, every_ms: 25, what: 'the replica replaying the primary' },
    );
  }
  const pause = () => standby.query('SELECT pg_wal_replay_pause()');
  const resume = () => standby.query('SELECT pg_wal_replay_resume()');

  async function get(who: 'admin' | 'analyst', url: string) {
    const r = await fetch(`${server.url}/api/v1${url}`, { headers: { cookie: cookies[who] } });
    const text = await r.text();
    return { status: r.status, read: r.headers.get('x-flocstream-read'), text, body: r.headers.get('content-type')?.includes('json') ? JSON.parse(text) : null };
  }
  async function signIn(email: string, password: string): Promise<string> {
    const r = await fetch(`${server.url}/api/v1/auth/login`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ email, password }) });
    expect(r.status).toBe(200);
    return r.headers.getSetCookie()[0]!.split(';')[0]!;
  }

  beforeAll(async () => {
    t = await createTestDatabase();
    replica = await startStreamingReplica(t.adminUrl, testDataDir());
    dataDir = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-replica-'));
    const password = `pw-${randomBytes(8).toString('hex')}`;
    const config = loadConfig({
      FLOCSTREAM_DATA_DIR: dataDir,
      DATABASE_URL: t.url,
      DATABASE_READ_URL: replica.urlOf(t.url),
      FLOCSTREAM_DEMO: '0',
      FLOCSTREAM_ADMIN_EMAIL: 'chief@test.invalid',
      FLOCSTREAM_ADMIN_PASSWORD: password,
    });
    server = await startServer({ ...config, port: 0 }, { log: pino({ level: 'silent' }) });
    primary = new pg.Client({ connectionString: t.url });
    await primary.connect();
    standby = new pg.Client({ connectionString: replica.urlOf(t.url) });
    await standby.connect();
    ({ plantId, tagIds } = await seedFixturePlant(server.ctx, { code: 'rr' }));
    await writeSignals(server.ctx, tagIds, undefined, { history_h: 2 });
    const analystPw = `pw-${randomBytes(8).toString('hex')}`;
    await userRepository(server.ctx.db.db).insert({ email: 'analyst@test.invalid', name: 'Analyst', role: 'analyst', passwordHash: await hashPassword(analystPw) });
    cookies.admin = await signIn('chief@test.invalid', password);
    cookies.analyst = await signIn('analyst@test.invalid', analystPw);
    adminId = (await primary.query<{ id: number }>(`SELECT id FROM users WHERE email = 'chief@test.invalid'`)).rows[0]!.id;
    await server.ctx.db.listener(server.ctx.log).ready();
    await caughtUp();
  }, 120_000);

  afterAll(async () => {
    await standby?.query('SELECT pg_wal_replay_resume()').catch(() => {});
    await standby?.end().catch(() => {});
    await primary?.end().catch(() => {});
    await server?.close();
    replica?.stop();
    await t?.drop();
    if (dataDir) fs.rmSync(dataDir, { recursive: true, force: true });
  });

  it('the replica is a hot standby of the primary (pg_is_in_recovery on one side only)', async () => {
    expect((await standby.query('SELECT pg_is_in_recovery() AS r')).rows[0].r).toBe(true);
    expect((await primary.query('SELECT pg_is_in_recovery() AS r')).rows[0].r).toBe(false);
  });

  it('samples, balance history, lab results and CSV exports answer from the replica; the rest from the primary', async () => {
    const tag = tagIds['AIT-111']!;
    const routed = [
      `/plants/${plantId}/tags/${tag}/samples`,
      `/plants/${plantId}/tags/${tag}/samples?format=csv`,
      `/plants/${plantId}/balance/history`,
      `/plants/${plantId}/balance/history?format=csv`,
      `/plants/${plantId}/lab-results`,
      `/plants/${plantId}/lab-results?format=csv`,
      `/plants/${plantId}/alarms?format=csv`,
      `/plants/${plantId}/tags?format=csv`,
      `/plants?format=csv`,
    ];
    for (const url of routed) {
      const r = await get('analyst', url);
      expect({ url, status: r.status, read: r.read }).toEqual({ url, status: 200, read: 'replica' });
    }
    for (const url of [`/plants/${plantId}/alarms`, `/plants/${plantId}/tags`, `/plants`]) {
      const r = await get('analyst', url);
      expect({ url, status: r.status, read: r.read }).toEqual({ url, status: 200, read: 'primary' });
    }
    // The live balance, the layout and the rest keep no header: they are not read routes.
    expect((await get('analyst', `/plants/${plantId}`)).read).toBeNull();

    // A sample committed on the primary while the replica's replay is paused: missing from the
    // replica's answer, there once replay resumed.
    const ts = new Date(Math.floor(Date.now() / 1000) * 1000 - 90_000);
    const url = `/plants/${plantId}/tags/${tag}/samples?from=${new Date(ts.getTime() - 60_000).toISOString()}&to=${new Date(ts.getTime() + 60_000).toISOString()}`;
    const has = (r: { body: { points: Array<{ ts: string; value: number | null }> } }) => r.body.points.some((p) => p.ts === ts.toISOString() && p.value === 4.321);
    await pause();
    try {
      await primary.query('SELECT flocstream_ensure_day_partition($1)', [ts]);
      await primary.query('INSERT INTO samples (tag_id, ts, value, quality) VALUES ($1, $2, 4.321, 0)', [tag, ts]);
      const before = await get('analyst', url);
      expect(before.read).toBe('replica');
      expect(has(before)).toBe(false);
    } finally {
      await resume();
    }
    await caughtUp();
    const after = await get('analyst', url);
    expect(after.read).toBe('replica');
    expect(has(after)).toBe(true);
  });

  it('a lab entry is written to the primary; its writer reads the primary until the replica replayed it, others read the replica', async () => {
    await caughtUp();
    await pause();
    let id: number;
    try {
      const r = await fetch(`${server.url}/api/v1/plants/${plantId}/lab-results`, {
        method: 'POST',
        headers: { cookie: cookies.admin, 'content-type': 'application/json', 'sec-fetch-site': 'same-origin' },
        body: JSON.stringify({ kind: 'MLSS', mlss_gL: 3.21, sampledAt: new Date(Date.now() - 60_000).toISOString(), location: 'ab1' }),
      });
      expect(r.status).toBe(201);
      id = ((await r.json()) as { id: number }).id;
      expect((await primary.query('SELECT count(*)::int AS n FROM lab_results WHERE id = $1', [id])).rows[0].n).toBe(1);
      expect((await standby.query('SELECT count(*)::int AS n FROM lab_results WHERE id = $1', [id])).rows[0].n).toBe(0);
      const own = await get('admin', `/plants/${plantId}/lab-results`);
      expect(own.read).toBe('primary');
      expect(own.body.results.map((x: { id: number }) => x.id)).toContain(id);
      const other = await get('analyst', `/plants/${plantId}/lab-results`);
      expect(other.read).toBe('replica');
      expect(other.body.results.map((x: { id: number }) => x.id)).not.toContain(id);
    } finally {
      await resume();
    }
    await caughtUp();
    const own = await get('admin', `/plants/${plantId}/lab-results`);
    expect(own.read).toBe('replica');
    expect(own.body.results.map((x: { id: number }) => x.id)).toContain(id);
  });

  it('after a history import its uploader reads the samples from the primary until the replica has them', async () => {
    const tag = tagIds['AIT-221']!;
    const base = Math.floor(Date.now() / HOUR_MS) * HOUR_MS - 3 * 24 * HOUR_MS;
    // Ten samples a minute apart: 8.0 + i/10 g/L (the import stores them as they are, the tag's unit being g/L).
    const rows = Array.from({ length: 10 }, (_, i) => `AIT-221,${new Date(base + i * 60_000).toISOString()},${(8 + i / 10).toFixed(1)}`);
    const url = `/plants/${plantId}/tags/${tag}/samples?from=${new Date(base).toISOString()}&to=${new Date(base + HOUR_MS).toISOString()}`;
    await caughtUp();
    await pause();
    try {
      const up = await fetch(`${server.url}/api/v1/plants/${plantId}/history`, {
        method: 'POST',
        headers: { cookie: cookies.admin, 'content-type': 'text/csv', 'sec-fetch-site': 'same-origin' },
        body: `tag,ts,value\n${rows.join('\n')}\n`,
      });
      expect(up.status).toBe(202);
      const { jobId } = (await up.json()) as { jobId: number };
      await waitFor(async () => (await get('admin', `/jobs/${jobId}`)).body?.state, (s) => s === 'done' || s === 'failed', { timeout_ms: 60_000, every_ms: 100, what: 'the import job' });
      expect((await get('admin', `/jobs/${jobId}`)).body.state).toBe('done');
      const own = await get('admin', url);
      expect(own.read).toBe('primary');
      expect(own.body.points.map((p: { value: number }) => p.value)).toEqual([8, 8.1, 8.2, 8.3, 8.4, 8.5, 8.6, 8.7, 8.8, 8.9]);
      const other = await get('analyst', url);
      expect(other.read).toBe('replica');
      expect(other.body.points).toEqual([]);
    } finally {
      await resume();
    }
    await caughtUp();
    // The recompute that follows the import fences the uploader again when it ends; wait for it, then for the replica.
    await waitFor(async () => (await primary.query(`SELECT count(*)::int AS n FROM history_jobs WHERE kind = 'recompute' AND state NOT IN ('done', 'failed')`)).rows[0].n, (n) => n === 0, {
      timeout_ms: 60_000,
      what: 'the recompute',
    });
    await caughtUp();
    for (const who of ['admin', 'analyst'] as const) {
      const r = await get(who, url);
      expect({ who, read: r.read, n: r.body.points.length }).toEqual({ who, read: 'replica', n: 10 });
    }
    expect(adminId).toBeGreaterThan(0);
  });

  // Last: it stops the replica.
  it('a replica that goes down costs no answer: the read routes answer from the primary and say so', async () => {
    const tag = tagIds['AIT-111']!;
    expect((await get('analyst', `/plants/${plantId}/lab-results`)).read).toBe('replica');
    await standby.end();
    replica.stop();
    for (const url of [`/plants/${plantId}/tags/${tag}/samples`, `/plants/${plantId}/balance/history?format=csv`, `/plants/${plantId}/lab-results`, `/plants/${plantId}/tags?format=csv`]) {
      const r = await get('analyst', url);
      expect({ url, status: r.status, read: r.read }).toEqual({ url, status: 200, read: 'primary' });
    }
  });
});
