import { randomBytes } from 'node:crypto';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { SampleStore } from '../../ingest/sink/sample-store.ts';
import { databaseUrls } from '../../server/db/client.ts';
import { grantRuntimeRoles } from '../../server/db/migrate.ts';
import { createTestDatabase, type TestDatabase } from '../helpers/db.ts';

/**
 * PostgreSQL roles (issue 15 item 11): migrations run as the owner; the API and ingest connect
 * as roles granted only what they need (server/db/migrate.ts grantRuntimeRoles). The checks are
 * PostgreSQL's own: SQLSTATE 42501 insufficient_privilege for a table the role was not granted,
 * and "must be owner" (also 42501) for DROP/ALTER, which only a table's owner may run
 * (PostgreSQL manual, DROP TABLE and ALTER TABLE).
 */
let t: TestDatabase;
let owner: pg.Client;
let apiUrl = '';
let ingestUrl = '';
const suffix = randomBytes(4).toString('hex');
const roles = { api: `t_api_${suffix}`, ingest: `t_ingest_${suffix}` };
const passwords = { api: randomBytes(12).toString('hex'), ingest: randomBytes(12).toString('hex') };

async function as(url: string): Promise<pg.Client> {
  const c = new pg.Client({ connectionString: url });
  await c.connect();
  return c;
}

async function code(p: Promise<unknown>): Promise<string | undefined> {
  try {
    await p;
    return undefined;
  } catch (err) {
    return (err as { code?: string }).code;
  }
}

beforeAll(async () => {
  t = await createTestDatabase();
  owner = await as(t.url);
  // The cluster's roles are shared by every test database: names of this run only.
  for (const k of ['api', 'ingest'] as const) await owner.query(`CREATE ROLE ${roles[k]} LOGIN PASSWORD '${passwords[k]}'`);
  const withRole = (k: 'api' | 'ingest') => {
    const u = new URL(t.url);
    u.username = roles[k];
    u.password = passwords[k];
    return u.toString();
  };
  apiUrl = withRole('api');
  ingestUrl = withRole('ingest');
  // What the API does at start with an external database and the two role URLs.
  const urls = databaseUrls({ databaseUrl: t.url, apiDatabaseUrl: apiUrl, ingestDatabaseUrl: ingestUrl });
  expect(urls.roles).toEqual(roles);
  await grantRuntimeRoles(urls.owner, urls.roles!);
  const p = await owner.query(`INSERT INTO plants (code, name) VALUES ('rt', 'Role test') RETURNING id`);
  const s = await owner.query(`INSERT INTO sources (plant_id, name, kind, url) VALUES ($1, 'rt-mqtt', 'mqtt', 'mqtt://127.0.0.1:1') RETURNING id`, [p.rows[0].id]);
  await owner.query(`INSERT INTO tags (plant_id, source_id, name, address, unit) VALUES ($1, $2, 'FIT-1', 'rt/FIT-1', 'm3/h')`, [p.rows[0].id, s.rows[0].id]);
});

afterAll(async () => {
  await owner.end();
  await t.drop();
  const admin = await as(t.adminUrl);
  for (const r of Object.values(roles)) await admin.query(`DROP OWNED BY ${r}; DROP ROLE ${r}`).catch(() => {});
  await admin.end();
});

describe('database roles', () => {
  it('ingest cannot read users, api_tokens or audit_log, and writes samples through its own write path', async () => {
    const c = await as(ingestUrl);
    try {
      for (const table of ['users', 'api_tokens', 'audit_log', 'mail_outbox']) {
        expect(await code(c.query(`SELECT * FROM ${table} LIMIT 1`)), table).toBe('42501');
      }
      expect(await code(c.query(`DROP TABLE samples`))).toBe('42501');
    } finally {
      await c.end();
    }
    // SampleStore is ingest's writer: COPY, day partitions (SECURITY DEFINER, migration 0006), rollups, tag_latest.
    const tag = await owner.query(`SELECT id FROM tags WHERE address = 'rt/FIT-1'`);
    const tagId = tag.rows[0].id as number;
    const store = new SampleStore(ingestUrl, { retentionDays: 400 });
    const ts = Date.parse('2026-12-01T10:00:00Z');
    try {
      await store.write(
        [
          { tagId, ts, value: 410, quality: 0 },
          { tagId, ts: ts + 60_000, value: 415, quality: 0 },
        ],
        [],
      );
    } finally {
      await store.close();
    }
    const n = await owner.query(`SELECT count(*)::int n, min(tableoid::regclass::text) p FROM samples WHERE tag_id = $1`, [tagId]);
    expect(n.rows[0]).toEqual({ n: 2, p: 'samples_20261201' });
    const latest = await owner.query(`SELECT value FROM tag_latest WHERE tag_id = $1`, [tagId]);
    expect(latest.rows[0].value).toBe(415);
  });

  it('the API reads and writes every table but cannot drop, alter or create one', async () => {
    const c = await as(apiUrl);
    try {
      expect((await c.query(`SELECT count(*)::int n FROM users`)).rows[0].n).toBeGreaterThanOrEqual(0);
      await c.query(`UPDATE plants SET name = 'Role test plant' WHERE code = 'rt'`);
      expect(await code(c.query(`DROP TABLE samples`))).toBe('42501');
      expect(await code(c.query(`DROP TABLE users`))).toBe('42501');
      expect(await code(c.query(`ALTER TABLE users ADD COLUMN x int`))).toBe('42501');
      expect(await code(c.query(`CREATE TABLE public.intruder (x int)`))).toBe('42501');
      // Its job queue's schema is its own (BullMQ creates and migrates its tables there).
      await c.query(`CREATE TABLE bullmq.role_probe (x int)`);
      await c.query(`DROP TABLE bullmq.role_probe`);
    } finally {
      await c.end();
    }
  });

  it('a table added by a later migration is the API’s to use and not ingest’s (default privileges)', async () => {
    await owner.query(`CREATE TABLE later_secret (x int)`);
    const api = await as(apiUrl);
    const ingest = await as(ingestUrl);
    try {
      await api.query(`INSERT INTO later_secret VALUES (1)`);
      expect(await code(ingest.query(`SELECT * FROM later_secret`))).toBe('42501');
    } finally {
      await api.end();
      await ingest.end();
    }
  });
});
