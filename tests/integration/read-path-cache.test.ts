/**
 * The read path's in-memory copies (server/auth/credential-cache.ts,
 * server/services/live-balance-cache.ts): served from memory, yet a revoked token, a disabled
 * user and a new balance take effect on the very next request — in this process at once, in
 * another API process on the same database through pg NOTIFY.
 */
import pino from 'pino';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { balanceLiveResponse } from '../../shared/contracts/plant-api.ts';
import { createApp } from '../../server/app.ts';
import type { AppContext } from '../../server/app-context.ts';
import { hashToken } from '../../server/auth/api-tokens.ts';
import { CredentialCache, credentialCache, credentialChanged } from '../../server/auth/credential-cache.ts';
import { openDatabase } from '../../server/db/client.ts';
import { liveBalanceCache } from '../../server/services/live-balance-cache.ts';
import { notifyStream } from '../../server/services/stream.service.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';

/** Polls `cond` every 10 ms until it holds; fails after `deadline_ms`. */
async function until(cond: () => boolean, deadline_ms = 5000): Promise<void> {
  const end = Date.now() + deadline_ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error('condition not met before the deadline');
    await new Promise((r) => setTimeout(r, 10));
  }
}

describe('read-path caches', () => {
  let h: TestApp;
  /** A second API process on the same database (its own pool, listener and caches). */
  let other: { ctx: AppContext; app: ReturnType<typeof createApp> };
  let plantId: number;

  beforeAll(async () => {
    h = await createTestApp();
    const db = openDatabase(h.t.url);
    const ctx: AppContext = { ...h.ctx, db, log: pino({ level: 'silent' }) };
    other = { ctx, app: createApp(ctx, { serveMonitor: false }) };
    plantId = (await h.ctx.db.pool.query(`INSERT INTO plants (code, name, peak_flow_m3h) VALUES ('cache', 'Cache', 3000) RETURNING id`)).rows[0].id;
    // Caches serve only while LISTEN is active; wait for it in both "processes".
    await Promise.all([h.ctx.db.listener(h.ctx.log).ready(), db.listener(other.ctx.log).ready()]);
  });
  afterAll(async () => {
    await other?.ctx.db.close();
    await h?.close();
  });

  it('a revoked token is refused on the next request, in this process and in another one', async () => {
    const operator = await h.agent('operator');
    const made = await operator.post('/api/v1/tokens').send({ name: 'cached', role: 'analyst', expiresInDays: 1 });
    expect(made.status).toBe(201);
    const bearer = `Bearer ${made.body.token as string}`;
    const key = CredentialCache.tokenKey(hashToken(made.body.token));
    for (const app of [h.app, other.app]) expect((await request(app).get('/api/v1/plants').set('Authorization', bearer)).status).toBe(200);
    // Both processes now answer this token from memory.
    expect(credentialCache(h.ctx).get(key)?.tokenId).toBe(made.body.id);
    expect(credentialCache(other.ctx).get(key)?.tokenId).toBe(made.body.id);

    expect((await operator.delete(`/api/v1/tokens/${made.body.id}`)).status).toBe(200);
    expect((await request(h.app).get('/api/v1/plants').set('Authorization', bearer)).status).toBe(401);
    // The other process hears it through NOTIFY flocstream_auth.
    await until(() => credentialCache(other.ctx).get(key) === undefined);
    expect((await request(other.app).get('/api/v1/plants').set('Authorization', bearer)).status).toBe(401);
  });

  it('a disabled user is refused on the next request (session and token), a role change applies at once (and ends the session)', async () => {
    const admin = await h.agent('admin');
    const integrator = await h.agent('integrator');
    const made = await integrator.post('/api/v1/tokens').send({ name: 'mine', role: 'integrator', expiresInDays: 1 });
    const bearer = `Bearer ${made.body.token as string}`;
    expect((await integrator.get('/api/v1/auth/me')).body.role).toBe('integrator');
    expect((await request(h.app).get('/api/v1/auth/me').set('Authorization', bearer)).body.role).toBe('integrator');
    expect(credentialCache(h.ctx).size).toBeGreaterThan(0);

    expect((await admin.patch(`/api/v1/users/${h.users.integrator.id}`).send({ role: 'analyst' })).status).toBe(200);
    // The role change ended the session (server/services/user.service.ts); a new one has the new role.
    expect((await integrator.get('/api/v1/auth/me')).status).toBe(401);
    expect((await (await h.agent('integrator')).get('/api/v1/auth/me')).body.role).toBe('analyst');
    // A token's role is capped by its owner's.
    expect((await request(h.app).get('/api/v1/auth/me').set('Authorization', bearer)).body.role).toBe('analyst');

    expect((await admin.patch(`/api/v1/users/${h.users.integrator.id}`).send({ disabled: true })).status).toBe(200);
    expect((await integrator.get('/api/v1/auth/me')).status).toBe(401);
    expect((await request(h.app).get('/api/v1/auth/me').set('Authorization', bearer)).status).toBe(401);
  });

  it('this process drops a changed credential before the announcement goes out', async () => {
    const analyst = await h.agent('analyst');
    const made = await analyst.post('/api/v1/tokens').send({ name: 'sync', role: 'analyst', expiresInDays: 1 });
    const key = CredentialCache.tokenKey(hashToken(made.body.token));
    expect((await request(h.app).get('/api/v1/plants').set('Authorization', `Bearer ${made.body.token as string}`)).status).toBe(200);
    expect(credentialCache(h.ctx).get(key)).toBeDefined();
    // Synchronously, before the NOTIFY has even been sent (it would also reach this process).
    const announced = credentialChanged(h.ctx, { tokenId: made.body.id });
    expect(credentialCache(h.ctx).get(key)).toBeUndefined();
    await announced;
  });

  it('signing out drops the session from the cache', async () => {
    const analyst = await h.agent('analyst');
    expect((await analyst.get('/api/v1/auth/me')).status).toBe(200);
    const before = credentialCache(h.ctx).size;
    expect((await analyst.post('/api/v1/auth/logout')).status).toBe(200);
    expect(credentialCache(h.ctx).size).toBe(before - 1);
  });

  it('a lookup racing an invalidation does not store the old answer', () => {
    const cache = new CredentialCache({ now: () => 0 });
    cache.setEnabled(true);
    const p = { userId: 7, email: 'x@test.invalid', role: 'analyst' as const, tokenId: null, plantIds: null };
    const generation = cache.generation;
    cache.drop({ userId: 7 }); // the change lands while the lookup is at the database
    cache.set('s:x', p, generation, 1e12);
    expect(cache.get('s:x')).toBeUndefined();
    cache.set('s:x', p, cache.generation, 1e12);
    expect(cache.get('s:x')).toEqual(p);
    // Never past the credential's own expiry.
    cache.set('s:y', p, cache.generation, 0);
    expect(cache.get('s:y')).toBeUndefined();
  });

  it('the live balance is served from memory and follows each announced balance, in both processes', async () => {
    const analyst = await h.agent('analyst');
    const none = balanceLiveResponse.parse((await analyst.get(`/api/v1/plants/${plantId}/balance/live`)).body);
    expect(none.balance).toBeNull();

    // As the balance engine does: insert, then announce on flocstream_stream.
    const write = async (n: number) => {
      const id = Number((await h.ctx.db.pool.query(`INSERT INTO balances (plant_id, ts, quality, data, inputs) VALUES ($1, now(), 'good', $2, '{}') RETURNING id`, [plantId, { n }])).rows[0].id);
      await notifyStream(h.ctx.db.pool, plantId, 'balance', { id, plantId });
      return id;
    };
    const first = await write(1);
    await Promise.all([liveBalanceCache(h.ctx).holds(plantId, first), liveBalanceCache(other.ctx).holds(plantId, first)]);
    expect(liveBalanceCache(h.ctx).answer(plantId)).toBeDefined();
    const a = balanceLiveResponse.parse((await analyst.get(`/api/v1/plants/${plantId}/balance/live`)).body);
    expect(a.balance).toMatchObject({ id: first, data: { n: 1 } });

    const second = await write(2);
    await Promise.all([liveBalanceCache(h.ctx).holds(plantId, second), liveBalanceCache(other.ctx).holds(plantId, second)]);
    const b = balanceLiveResponse.parse((await analyst.get(`/api/v1/plants/${plantId}/balance/live`)).body);
    expect(b.balance).toMatchObject({ id: second, data: { n: 2 } });
    expect(b.age_s).toBeGreaterThanOrEqual(0);
    const viaOther = await request(other.app).get(`/api/v1/plants/${plantId}/balance/live`).set('Cookie', (await loginCookie(other.app, h)) ?? '');
    expect(balanceLiveResponse.parse(viaOther.body).balance).toMatchObject({ id: second });
  });

  it('the cached live balance keeps the plant scope and the role check', async () => {
    const operator = await h.agent('operator');
    const scoped = await operator.post('/api/v1/tokens').send({ name: 'elsewhere', role: 'analyst', expiresInDays: 1, plantIds: [plantId + 1000] });
    expect(liveBalanceCache(h.ctx).answer(plantId)).toBeDefined();
    expect((await request(h.app).get(`/api/v1/plants/${plantId}/balance/live`).set('Authorization', `Bearer ${scoped.body.token}`)).status).toBe(403);
    expect((await request(h.app).get(`/api/v1/plants/${plantId}/balance/live`)).status).toBe(401);
  });
});

/** Signs in as the analyst on `app` and returns its session cookie. */
async function loginCookie(app: ReturnType<typeof createApp>, h: TestApp): Promise<string | undefined> {
  const r = await request(app).post('/api/v1/auth/login').send({ email: h.users.analyst.email, password: h.users.analyst.password });
  const set = r.headers['set-cookie'] as unknown as string[] | undefined;
  return set?.[0]?.split(';')[0];
}
