import { randomBytes } from 'node:crypto';
import pino from 'pino';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { AppContext } from '../../server/app-context.ts';
import { loadConfig } from '../../server/config.ts';
import { openDatabase } from '../../server/db/client.ts';
import { startApiProcess, stopApiProcess, type ApiProcess } from '../helpers/api-process.ts';
import { createTestDatabase, type TestDatabase } from '../helpers/db.ts';
import { seedFixturePlant } from './balance-fixture.ts';

const SECRET = randomBytes(32).toString('base64url');
const ADMIN = { email: 'chief@scale.invalid', password: `pw-${randomBytes(8).toString('hex')}` };

/**
 * Several API processes behind one load balancer (the README's scale-out guide): a session
 * cookie and a paging cursor written by one process are read by any other of the deployment.
 */
describe('paging across two API processes', () => {
  let t: TestDatabase;
  let ctx: AppContext;
  let a: ApiProcess | undefined;
  let b: ApiProcess | undefined;
  let plantId: number;
  beforeAll(async () => {
    t = await createTestDatabase();
    ctx = { db: openDatabase(t.url), config: loadConfig({ DATABASE_URL: t.url, FLOCSTREAM_DEMO: '0' }), log: pino({ level: 'silent' }), sessionKey: randomBytes(32) };
    ({ plantId } = await seedFixturePlant(ctx, { code: 'pc' }));
    await ctx.db.pool.query(
      `INSERT INTO alarms (plant_id, rule, target, priority, state, message, raised_at)
       SELECT $1, 'mlss-low', 'ab1', 3, 'cleared', 'MLSS low ' || i, now() - i * interval '1 h' FROM generate_series(1, 5) i`,
      [plantId],
    );
    // One after the other: the first start creates the admin, the second finds it.
    const env = { DATABASE_URL: t.url, FLOCSTREAM_SESSION_SECRET: SECRET, FLOCSTREAM_ADMIN_EMAIL: ADMIN.email, FLOCSTREAM_ADMIN_PASSWORD: ADMIN.password };
    a = await startApiProcess(env);
    b = await startApiProcess(env);
  }, 120_000);
  afterAll(async () => {
    await Promise.all([stopApiProcess(a), stopApiProcess(b)]);
    await ctx?.db.close();
    await t?.drop();
  });

  it('the next page of a list asked of one process is answered by the other', async () => {
    const login = await fetch(`${a!.url}/api/v1/auth/login`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(ADMIN) });
    expect(login.status).toBe(200);
    const cookie = login.headers.getSetCookie()[0]!.split(';')[0]!;
    const get = async (base: string, query: string) => {
      const r = await fetch(`${base}/api/v1/plants/${plantId}/alarms?${query}`, { headers: { cookie } });
      return { status: r.status, body: (await r.json()) as { alarms?: Array<{ message: string }>; nextCursor?: string | null } };
    };
    const p1 = await get(a!.url, 'limit=2');
    expect(p1.status).toBe(200);
    expect(p1.body.alarms!.map((x) => x.message)).toEqual(['MLSS low 1', 'MLSS low 2']);
    const p2 = await get(b!.url, `limit=2&cursor=${encodeURIComponent(p1.body.nextCursor!)}`);
    expect(p2.status).toBe(200);
    expect(p2.body.alarms!.map((x) => x.message)).toEqual(['MLSS low 3', 'MLSS low 4']);
    const p3 = await get(a!.url, `limit=2&cursor=${encodeURIComponent(p2.body.nextCursor!)}`);
    expect(p3.body.alarms!.map((x) => x.message)).toEqual(['MLSS low 5']);
    expect(p3.body.nextCursor).toBeNull();
  });
});
