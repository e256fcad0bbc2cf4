import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { z } from 'zod';
import { ROLES, roleAtLeast, type Role } from '../../shared/contracts/roles.ts';
import { apiRoutes } from '../../server/app.ts';
import { hashToken } from '../../server/auth/api-tokens.ts';
import { services } from '../../server/app-context.ts';
import type { RouteDef } from '../../server/http/route.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';
import { seedFixturePlant } from './balance-fixture.ts';

/** Fill Express path parameters with an id that exists in no table (routes answer 404 or 422, never 500). */
function concrete(path: string): string {
  return path.replace(/:[A-Za-z_]+/g, '999999');
}

/** Whether a route's query or body schema has a top-level `plantId` key (settings take the plant there). */
function takesPlantId(schema: z.ZodType | undefined): boolean {
  return schema instanceof z.ZodObject && 'plantId' in schema.shape;
}

/** One plant's ids by path-parameter name; `id` is the plant's signal mapping (the one plant-owned `:id`). */
type PlantIds = { plantId: number; tagId: number; sourceId: number; alarmId: number; id: number };

/** The request a route list entry makes against one plant: its path parameters, and `plantId` in the query or body where the route takes one. */
function probe(d: RouteDef, ids: PlantIds): { url: string; body: Record<string, unknown>; addressesPlant: boolean } {
  let addressesPlant = false;
  const path = d.path.replace(/:([A-Za-z_]+)/g, (_m, name: string) => {
    const v = ids[name as keyof PlantIds];
    if (v === undefined) return '999999';
    // tokens/:id and users/:id are not plant data; every other `:id` route is the signal map.
    if (name === 'id' && !d.path.startsWith('/signal-map/')) return '999999';
    addressesPlant = true;
    return String(v);
  });
  const query = takesPlantId(d.query) ? `?plantId=${ids.plantId}` : '';
  const body: Record<string, unknown> = takesPlantId(d.body) ? { plantId: ids.plantId } : {};
  if (query || Object.keys(body).length) addressesPlant = true;
  return { url: `/api/v1${path}${query}`, body, addressesPlant };
}

describe('role matrix over every /api/v1 route', () => {
  let h: TestApp;
  const agents = {} as Record<Role, Awaited<ReturnType<TestApp['agent']>>>;
  beforeAll(async () => {
    h = await createTestApp();
    for (const r of ROLES) agents[r] = await h.agent(r);
  });
  afterAll(async () => h.close());

  it('every protected route: no credentials → 401, lower role → 403, enough role → neither', async () => {
    const defs = apiRoutes(h.ctx).filter((d) => d.role !== 'public' && d.path !== '/auth/login');
    expect(defs.length).toBeGreaterThan(5);
    for (const d of defs) {
      const url = `/api/v1${concrete(d.path)}`;
      const anon = await request(h.app)[d.method](url).send({});
      expect(anon.status, `${d.method} ${d.path} anonymous`).toBe(401);
      for (const role of ROLES) {
        const r = await agents[role][d.method](url).send({});
        const allowed = roleAtLeast(role, d.role as Role);
        if (allowed) expect([401, 403], `${d.method} ${d.path} as ${role}`).not.toContain(r.status);
        else expect(r.status, `${d.method} ${d.path} as ${role}`).toBe(403);
        expect(r.status, `${d.method} ${d.path} as ${role} never 500`).toBeLessThan(500);
      }
    }
  });

  it('every route with a token scoped to plant A: plant B is 403 (absent from lists), nothing of B leaks or changes; plant A passes', async () => {
    const a = await seedFixturePlant(h.ctx, { code: 'pa' });
    // "zq9secret" marks plant B's data: its code, tag addresses, mail recipient, outbox mail.
    const b = await seedFixturePlant(h.ctx, { code: 'zq9secret' });
    const pool = h.ctx.db.pool;
    await services(h.ctx).settings.put(null, { plantId: b.plantId, values: { 'mail.recipients': ['zq9secret@test.invalid'] } });
    await pool.query(`INSERT INTO mail_outbox (mail_from, rcpt_to, subject, text, raw, size) VALUES ('f@test.invalid', '{zq9secret@test.invalid}', 'zq9secret alarm', 'zq9secret', 'zq9secret', 9)`);
    const idsOf = async (plantId: number, tagIds: Record<string, number>): Promise<PlantIds> => {
      const alarm = await pool.query(`INSERT INTO alarms (plant_id, rule, target, priority, state, message, raised_at) VALUES ($1, 'mlss-floor', 'ab1', 2, 'active', 'zq9 test alarm', now()) RETURNING id`, [plantId]);
      const src = await pool.query('SELECT id FROM sources WHERE plant_id = $1 ORDER BY id LIMIT 1', [plantId]);
      const map = await pool.query('SELECT id FROM signal_map WHERE plant_id = $1 ORDER BY id LIMIT 1', [plantId]);
      return { plantId, tagId: Object.values(tagIds)[0]!, sourceId: src.rows[0].id, alarmId: alarm.rows[0].id, id: map.rows[0].id };
    };
    const A = await idsOf(a.plantId, a.tagIds);
    const B = await idsOf(b.plantId, b.tagIds);
    const snapshotB = async () =>
      JSON.stringify(
        await Promise.all(
          ['settings', 'sources', 'tags', 'signal_map', 'alarms', 'lab_results', 'trains'].map(async (t) => (await pool.query(`SELECT * FROM ${t} WHERE plant_id = $1 ORDER BY 1, 2`, [B.plantId])).rows),
        ),
      );
    const before = await snapshotB();

    const admin = await h.agent('admin');
    const made = await admin.post('/api/v1/tokens').send({ name: 'plant A only', role: 'admin', expiresInDays: 1, plantIds: [A.plantId] });
    expect(made.status).toBe(201);
    const auth = { Authorization: `Bearer ${made.body.token}` };

    const defs = apiRoutes(h.ctx).filter((d) => d.role !== 'public' && d.path !== '/auth/login');
    for (const d of defs) {
      const p = probe(d, B);
      const r = await request(h.app)[d.method](p.url).set(auth).send(p.body);
      const what = `${d.method} ${p.url} with a plant-A token`;
      expect(r.status, `${what} never 500`).toBeLessThan(500);
      if (r.status < 300) expect(JSON.stringify(r.body) + r.text, `${what} leaks plant B`).not.toMatch(/zq9secret/);
      // A read of plant B is refused outright; a write may fail its body validation first (422), never succeed.
      if (p.addressesPlant) expect(d.method === 'get' ? [403] : [403, 422], `${what}: ${r.status} ${r.text.slice(0, 200)}`).toContain(r.status);
    }
    expect(await snapshotB(), 'plant B unchanged').toBe(before);

    // The same token reads its own plant A: every plant read (not the SSE stream, whose answer never ends) passes the scope check.
    for (const d of defs.filter((x) => x.method === 'get' && x.produces !== 'text/event-stream')) {
      const p = probe(d, A);
      if (!p.addressesPlant || d.path.startsWith('/sources/')) continue; // source test/browse/discovery would dial the fixture's dead endpoints
      const r = await request(h.app).get(p.url).set(auth);
      expect(r.status, `GET ${p.url} of its own plant: ${r.text.slice(0, 200)}`).toBe(200);
    }
    // Lists keep only plant A's rows; the global settings and the outbox span every plant.
    const plants = await request(h.app).get('/api/v1/plants').set(auth);
    expect(plants.body.map((x: { id: number }) => x.id)).toEqual([A.plantId]);
    expect((await request(h.app).get('/api/v1/settings?plantId=0').set(auth)).status).toBe(403);
    expect((await request(h.app).put('/api/v1/settings').set(auth).send({ plantId: B.plantId, values: { 'alarm.on_delay_s': 1 } })).status).toBe(403);
    expect((await request(h.app).put('/api/v1/settings').set(auth).send({ plantId: 0, values: { 'mail.recipients': ['x@test.invalid'] } })).status).toBe(403);
    expect((await request(h.app).put('/api/v1/settings').set(auth).send({ plantId: A.plantId, values: { 'alarm.on_delay_s': 1 } })).status).toBe(200);
    expect((await request(h.app).get('/api/v1/outbox').set(auth)).status).toBe(403);
    expect((await admin.get('/api/v1/outbox')).body.some((m: { subject: string }) => m.subject === 'zq9secret alarm')).toBe(true);
    expect(await snapshotB(), 'plant B unchanged').toBe(before);
  });

  it('plant scope: a token scoped to one plant gets 403 on every plant route of another plant', async () => {
    const own = await h.ctx.db.pool.query(`INSERT INTO plants (code, name) VALUES ('scope-own', 'Own') RETURNING id`);
    const other = await h.ctx.db.pool.query(`INSERT INTO plants (code, name) VALUES ('scope-other', 'Other') RETURNING id`);
    const made = await agents.admin.post('/api/v1/tokens').send({ name: 'scoped', role: 'admin', expiresInDays: 1, plantIds: [own.rows[0].id] });
    expect(made.status).toBe(201);
    // GET and DELETE carry no body, so nothing but the scope can refuse them; the other plant exists.
    const defs = apiRoutes(h.ctx).filter((d) => d.path.includes(':plantId') && (d.method === 'get' || d.method === 'delete') && d.produces !== 'text/event-stream');
    expect(defs.length).toBeGreaterThan(5);
    for (const d of defs) {
      const url = `/api/v1${d.path.replace(':plantId', String(other.rows[0].id)).replace(/:[A-Za-z_]+/g, '999999')}`;
      const r = await request(h.app)[d.method](url).set('Authorization', `Bearer ${made.body.token}`);
      expect(r.status, `${d.method} ${d.path} with a token scoped to another plant`).toBe(403);
    }
    expect((await request(h.app).get(`/api/v1/settings?plantId=${other.rows[0].id}`).set('Authorization', `Bearer ${made.body.token}`)).status).toBe(403);
  });

  it('route groups give their designed 2xx to the roles allowed', async () => {
    for (const role of ROLES) {
      expect((await agents[role].get('/api/v1/auth/me')).status).toBe(200);
      expect((await agents[role].get('/api/v1/tokens')).status).toBe(200);
      expect((await agents[role].get('/api/v1/users')).status).toBe(role === 'admin' ? 200 : 403);
    }
    const created = await agents.admin.post('/api/v1/users').send({ email: 'New.Person@Test.invalid', name: 'New Person', role: 'operator', password: 'a-long-password-1' });
    expect(created.status).toBe(201);
    expect(created.body.email).toBe('new.person@test.invalid');
    expect(created.body).not.toHaveProperty('passwordHash');
    const patched = await agents.admin.patch(`/api/v1/users/${created.body.id}`).send({ role: 'analyst' });
    expect(patched.status).toBe(200);
    expect(patched.body.role).toBe('analyst');
    expect((await agents.admin.delete(`/api/v1/users/${created.body.id}`)).status).toBe(200);
    const dup = await agents.admin.post('/api/v1/users').send({ email: h.users.operator.email, name: 'x', role: 'operator', password: 'a-long-password-1' });
    expect(dup.status).toBe(409);
  });

  it('tokens: role no higher than the owner, shown once, stored hashed, revocable, expiring', async () => {
    const tooHigh = await agents.operator.post('/api/v1/tokens').send({ name: 't', role: 'admin', expiresInDays: 5 });
    expect(tooHigh.status).toBe(403);
    const made = await agents.operator.post('/api/v1/tokens').send({ name: 'report', role: 'analyst', expiresInDays: 5 });
    expect(made.status).toBe(201);
    const secret: string = made.body.token;
    expect(secret).toMatch(/^fst_/);
    const stored = await h.ctx.db.pool.query('SELECT token_hash FROM api_tokens WHERE id = $1', [made.body.id]);
    expect(stored.rows[0].token_hash).toBe(hashToken(secret));
    expect(stored.rows[0].token_hash).not.toContain(secret);
    const list = await agents.operator.get('/api/v1/tokens');
    expect(JSON.stringify(list.body)).not.toContain(secret);

    const me = await request(h.app).get('/api/v1/auth/me').set('Authorization', `Bearer ${secret}`);
    expect(me.status).toBe(200);
    expect(me.body.role).toBe('analyst');
    expect(me.body.viaToken).toBe(true);
    // A token may not manage tokens or users (session only).
    expect((await request(h.app).post('/api/v1/tokens').set('Authorization', `Bearer ${secret}`).send({ name: 'x', role: 'analyst', expiresInDays: 1 })).status).toBe(403);

    expect((await agents.operator.delete(`/api/v1/tokens/${made.body.id}`)).status).toBe(200);
    expect((await request(h.app).get('/api/v1/auth/me').set('Authorization', `Bearer ${secret}`)).status).toBe(401);
    // Another user's token cannot be revoked by me.
    const mine = await agents.analyst.post('/api/v1/tokens').send({ name: 'mine', role: 'analyst', expiresInDays: 1 });
    expect((await agents.operator.delete(`/api/v1/tokens/${mine.body.id}`)).status).toBe(404);

    // Expired: move the expiry into the past.
    await h.ctx.db.pool.query(`UPDATE api_tokens SET expires_at = now() - interval '1 second' WHERE id = $1`, [mine.body.id]);
    expect((await request(h.app).get('/api/v1/auth/me').set('Authorization', `Bearer ${mine.body.token}`)).status).toBe(401);
    expect((await request(h.app).get('/api/v1/auth/me').set('Authorization', 'Bearer fst_nonsense')).status).toBe(401);
  });

  it('every write is in the audit log with who and what', async () => {
    const before = await h.ctx.db.pool.query(`SELECT count(*)::int n FROM audit_log WHERE action = 'token.create'`);
    await agents.integrator.post('/api/v1/tokens').send({ name: 'audit-me', role: 'operator', expiresInDays: 2 });
    const rows = await h.ctx.db.pool.query(`SELECT actor, action, target, details, ts FROM audit_log WHERE action = 'token.create' ORDER BY id DESC LIMIT 1`);
    const after = await h.ctx.db.pool.query(`SELECT count(*)::int n FROM audit_log WHERE action = 'token.create'`);
    expect(after.rows[0].n).toBe(before.rows[0].n + 1);
    expect(rows.rows[0].actor).toBe(h.users.integrator.email);
    expect(rows.rows[0].details.name).toBe('audit-me');
    expect(JSON.stringify(rows.rows[0].details)).not.toMatch(/fst_/);
  });

  it('bad input: malformed JSON → 400, wrong types and missing fields → 422 with field names, never 500', async () => {
    const malformed = await agents.admin.post('/api/v1/users').set('Content-Type', 'application/json').send('{"email": ');
    expect(malformed.status).toBe(400);
    expect(malformed.body.error.code).toBe('malformed_json');
    const wrong = await agents.admin.post('/api/v1/users').send({ email: 42, name: ['x'], role: 'chief', password: 'short' });
    expect(wrong.status).toBe(422);
    expect(Object.keys(wrong.body.error.fields).sort()).toEqual(['email', 'name', 'password', 'role']);
    const missing = await agents.analyst.post('/api/v1/tokens').send({});
    expect(missing.status).toBe(422);
    expect(Object.keys(missing.body.error.fields).sort()).toEqual(['expiresInDays', 'name', 'role']);
    const extra = await agents.analyst.post('/api/v1/tokens').send({ name: 'a', role: 'analyst', expiresInDays: 1, admin: true });
    expect(extra.status).toBe(422);
    const badId = await agents.admin.patch('/api/v1/users/abc').send({ name: 'x' });
    expect(badId.status).toBe(422);
    expect(badId.body.error.fields).toHaveProperty('id');
    const big = await agents.admin.post('/api/v1/users').send({ name: 'x'.repeat(300_000) });
    expect(big.status).toBe(413);
    expect(JSON.stringify([malformed.body, wrong.body, big.body])).not.toMatch(/at .*\.ts:\d+/);
  });

  it('five wrong passwords → 429, even for the right password afterwards', async () => {
    const email = h.users.analyst.email;
    for (let i = 0; i < 5; i++) {
      const r = await request(h.app).post('/api/v1/auth/login').send({ email, password: `wrong-${i}` });
      expect(r.status).toBe(401);
    }
    const locked = await request(h.app).post('/api/v1/auth/login').send({ email, password: h.users.analyst.password });
    expect(locked.status).toBe(429);
    expect(Number(locked.headers['retry-after'])).toBeGreaterThan(0);
  });

  it('session cookie is httpOnly and SameSite=Strict; sign-out clears it; a forged cookie is 401', async () => {
    const r = await request(h.app).post('/api/v1/auth/login').send({ email: h.users.operator.email, password: h.users.operator.password });
    const cookie = String(r.headers['set-cookie']);
    expect(cookie).toMatch(/HttpOnly/);
    expect(cookie).toMatch(/SameSite=Strict/);
    const out = await request(h.app).post('/api/v1/auth/logout').set('Cookie', cookie.split(';')[0]!).set('Sec-Fetch-Site', 'same-origin');
    expect(String(out.headers['set-cookie'])).toMatch(/flocstream_session=;/);
    const forged = await request(h.app).get('/api/v1/auth/me').set('Cookie', 'flocstream_session=eyJhbGciOiJIUzI1NiJ9.eyJzdWIiOiIxIn0.AAAA');
    expect(forged.status).toBe(401);
  });

  it('a disabled user loses access at once', async () => {
    const a = await h.agent('integrator');
    expect((await a.get('/api/v1/auth/me')).status).toBe(200);
    await agents.admin.patch(`/api/v1/users/${h.users.integrator.id}`).send({ disabled: true });
    expect((await a.get('/api/v1/auth/me')).status).toBe(401);
    await agents.admin.patch(`/api/v1/users/${h.users.integrator.id}`).send({ disabled: false });
  });

  it('health needs no credentials and reports the database; OpenAPI covers every route', async () => {
    const health = await request(h.app).get('/api/health');
    expect(health.status).toBe(200);
    expect(health.body.database.ok).toBe(true);
    const doc = await request(h.app).get('/api/v1/openapi.json');
    expect(doc.status).toBe(200);
    for (const d of apiRoutes(h.ctx)) {
      const p = '/api/v1' + d.path.replace(/:([A-Za-z_]+)/g, '{$1}');
      expect(doc.body.paths[p]?.[d.method], `${d.method} ${p}`).toBeDefined();
    }
  });
});
