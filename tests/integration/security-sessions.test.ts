/**
 * Cookie-authenticated requests and the life of a session (issue 15 items 4 and 6), over real
 * HTTP on a listening port so `Origin` and `Host` are what a browser would send:
 *
 * - CSRF (OWASP CSRF Prevention Cheat Sheet: verify Origin, Fetch Metadata): a write carrying the
 *   operator's cookie from a foreign origin, or as text/plain, cannot acknowledge an alarm; the
 *   same write from the monitor's own origin, and a Bearer script without Origin, can.
 * - Sessions are server-side (OWASP Session Management Cheat Sheet: invalidate on logout and on
 *   privilege change): a copied cookie is refused after sign-out, a password change, a disable —
 *   in this API process and in a second one on the same database; open streams of an ended
 *   session or a revoked token close within 30 s.
 */
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import pino from 'pino';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createApp } from '../../server/app.ts';
import type { AppContext } from '../../server/app-context.ts';
import { openDatabase } from '../../server/db/client.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';
import { waitFor } from '../helpers/wait.ts';

/** Listens on a random port; the base URL is also the origin a browser on the monitor would send. */
async function listen(app: http.RequestListener): Promise<{ url: string; close(): Promise<void> }> {
  const server = http.createServer(app);
  await new Promise<void>((r) => server.listen(0, '127.0.0.1', r));
  const { port } = server.address() as AddressInfo;
  return {
    url: `http://127.0.0.1:${port}`,
    close: () =>
      new Promise((r) => {
        server.closeAllConnections();
        server.close(() => r());
      }),
  };
}

async function signIn(base: string, email: string, password: string): Promise<string> {
  const r = await fetch(`${base}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json', Origin: base }, body: JSON.stringify({ email, password }) });
  expect(r.status).toBe(200);
  return r.headers.getSetCookie().map((c) => c.split(';')[0]).join('; ');
}

/**
 * Opens the plant's SSE stream with `headers` and resolves once `: ready` arrived; `closed`
 * resolves when the server ends the response.
 */
function openStream(base: string, plantId: number, headers: Record<string, string>): Promise<{ closed: Promise<string>; res: http.IncomingMessage }> {
  return new Promise((resolve, reject) => {
    const req = http.get(`${base}/api/v1/plants/${plantId}/stream?events=balance`, { headers: { Accept: 'text/event-stream', ...headers } }, (res) => {
      if (res.statusCode !== 200) return reject(new Error(`stream answered ${res.statusCode}`));
      let text = '';
      const closed = new Promise<string>((r) => res.once('end', () => r(text)));
      res.setEncoding('utf8');
      res.on('data', (chunk: string) => {
        const was = text;
        text += chunk;
        if (!was.includes(': ready') && text.includes(': ready')) resolve({ closed, res });
      });
    });
    req.on('error', reject);
  });
}

/** Resolves with the stream's text when it ends within `deadline_ms`; rejects otherwise (and drops the connection). */
async function endsWithin(s: { closed: Promise<string>; res: http.IncomingMessage }, deadline_ms: number): Promise<string> {
  let timer: NodeJS.Timeout | undefined;
  try {
    return await Promise.race([s.closed, new Promise<string>((_r, reject) => (timer = setTimeout(() => reject(new Error(`the stream was still open after ${deadline_ms} ms`)), deadline_ms)))]);
  } finally {
    clearTimeout(timer);
    s.res.destroy();
  }
}

describe('CSRF guard and revocable sessions', () => {
  let h: TestApp;
  let srv: { url: string; close(): Promise<void> };
  /** A second API process on the same database (its own pool, LISTEN connection and caches). */
  let other: { ctx: AppContext; srv: { url: string; close(): Promise<void> } };
  let plantId: number;

  beforeAll(async () => {
    h = await createTestApp();
    srv = await listen(h.app);
    const db = openDatabase(h.t.url);
    const ctx: AppContext = { ...h.ctx, db, log: pino({ level: 'silent' }) };
    other = { ctx, srv: await listen(createApp(ctx, { serveMonitor: false })) };
    plantId = (await h.ctx.db.pool.query(`INSERT INTO plants (code, name, peak_flow_m3h) VALUES ('sec', 'Security', 3000) RETURNING id`)).rows[0].id;
    await Promise.all([h.ctx.db.listener(h.ctx.log).ready(), db.listener(ctx.log).ready()]);
  });
  afterAll(async () => {
    await other?.srv.close();
    await other?.ctx.db.close();
    await srv?.close();
    await h?.close();
  });

  async function raisedAlarm(): Promise<number> {
    const r = await h.ctx.db.pool.query(
      `INSERT INTO alarms (plant_id, rule, priority, state, message, raised_at) VALUES ($1, 'mlss-low', 2, 'raised', 'MLSS below the low limit', now()) RETURNING id`,
      [plantId],
    );
    return r.rows[0].id;
  }
  const stateOf = async (id: number) => (await h.ctx.db.pool.query(`SELECT state FROM alarms WHERE id = $1`, [id])).rows[0].state as string;

  describe('CSRF', () => {
    let cookie: string;
    beforeAll(async () => {
      cookie = await signIn(srv.url, h.users.operator.email, h.users.operator.password);
    });
    const ack = (id: number, headers: Record<string, string>, body = '{}') => fetch(`${srv.url}/api/v1/plants/${plantId}/alarms/${id}/ack`, { method: 'POST', headers: { Cookie: cookie, ...headers }, body });

    it('a text/plain POST from a foreign origin with the operator cookie does not acknowledge the alarm', async () => {
      const id = await raisedAlarm();
      // What a page on another port of the same host can send without a CORS preflight.
      const r = await ack(id, { 'Content-Type': 'text/plain', Origin: 'http://127.0.0.1:1' }, '{"comment":"forged"}');
      expect(r.status).toBe(403);
      expect(((await r.json()) as { error: { message: string } }).error.message).toMatch(/cross-origin request refused/);
      expect(await stateOf(id)).toBe('raised');
    });

    it('a JSON POST from a foreign origin, or one marked cross-site, is refused as well', async () => {
      const id = await raisedAlarm();
      expect((await ack(id, { 'Content-Type': 'application/json', Origin: 'http://evil.invalid' })).status).toBe(403);
      expect((await ack(id, { 'Content-Type': 'application/json', Origin: 'null' })).status).toBe(403);
      expect((await ack(id, { 'Content-Type': 'application/json', 'Sec-Fetch-Site': 'same-site' })).status).toBe(403);
      // No Origin and no Fetch Metadata: a cookie alone does not make a write.
      const bare = await ack(id, { 'Content-Type': 'application/json' });
      expect(bare.status).toBe(403);
      expect(((await bare.json()) as { error: { message: string } }).error.message).toMatch(/send an Origin header/);
      expect(await stateOf(id)).toBe('raised');
    });

    it('same origin but text/plain is refused: a cookie write sends JSON or CSV', async () => {
      const id = await raisedAlarm();
      const r = await ack(id, { 'Content-Type': 'text/plain', Origin: srv.url }, '{}');
      expect(r.status).toBe(403);
      expect(((await r.json()) as { error: { message: string } }).error.message).toMatch(/JSON or CSV/);
      expect(await stateOf(id)).toBe('raised');
    });

    it('a same-origin JSON request acknowledges (Origin, or Sec-Fetch-Site: same-origin)', async () => {
      const a = await raisedAlarm();
      const r = await ack(a, { 'Content-Type': 'application/json', Origin: srv.url }, '{"comment":"seen"}');
      expect(r.status).toBe(200);
      expect(await stateOf(a)).toBe('acknowledged');
      const b = await raisedAlarm();
      expect((await ack(b, { 'Content-Type': 'application/json', 'Sec-Fetch-Site': 'same-origin' })).status).toBe(200);
      expect(await stateOf(b)).toBe('acknowledged');
    });

    it('a Bearer caller without Origin is unaffected (even with text/plain)', async () => {
      const made = await fetch(`${srv.url}/api/v1/tokens`, {
        method: 'POST',
        headers: { Cookie: cookie, Origin: srv.url, 'Content-Type': 'application/json' },
        body: JSON.stringify({ name: 'csrf-script', role: 'operator', expiresInDays: 1 }),
      });
      expect(made.status).toBe(201);
      const { token } = (await made.json()) as { token: string };
      const id = await raisedAlarm();
      const r = await fetch(`${srv.url}/api/v1/plants/${plantId}/alarms/${id}/ack`, { method: 'POST', headers: { Authorization: `Bearer ${token}`, 'Content-Type': 'application/json' }, body: '{}' });
      expect(r.status).toBe(200);
      expect(await stateOf(id)).toBe('acknowledged');
    });

    it('sign-in from a foreign origin is refused (login CSRF); from the own origin or a script it works', async () => {
      const body = JSON.stringify({ email: h.users.analyst.email, password: h.users.analyst.password });
      const foreign = await fetch(`${srv.url}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json', Origin: 'http://127.0.0.1:1' }, body });
      expect(foreign.status).toBe(403);
      expect(foreign.headers.getSetCookie()).toEqual([]);
      const form = await fetch(`${srv.url}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'text/plain', Origin: srv.url }, body });
      expect(form.status).toBe(403);
      expect((await fetch(`${srv.url}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json', Origin: srv.url }, body })).status).toBe(200);
      expect((await fetch(`${srv.url}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json' }, body })).status).toBe(200);
    });
  });

  describe('sessions', () => {
    it('a copied cookie is 401 after sign-out, here and in another API process; the session row says when and from where', async () => {
      const cookie = await signIn(srv.url, h.users.analyst.email, h.users.analyst.password);
      const me = (base: string) => fetch(`${base}/api/v1/auth/me`, { headers: { Cookie: cookie } });
      // Both processes serve the cookie (and keep it in their credential caches).
      expect((await me(srv.url)).status).toBe(200);
      expect((await me(other.srv.url)).status).toBe(200);
      const row = (await h.ctx.db.pool.query(`SELECT * FROM sessions WHERE user_id = $1 ORDER BY created_at DESC LIMIT 1`, [h.users.analyst.id])).rows[0];
      expect(row.revoked_at).toBeNull();
      expect(row.user_agent).toBeTruthy();
      expect(row.ip).toMatch(/127\.0\.0\.1/);
      // SESSION_TTL_S: 12 h (created_at is the database's clock, expires_at the API's).
      expect(Math.abs(row.expires_at.getTime() - row.created_at.getTime() - 12 * 3600 * 1000)).toBeLessThan(5000);

      const out = await fetch(`${srv.url}/api/v1/auth/logout`, { method: 'POST', headers: { Cookie: cookie, Origin: srv.url } });
      expect(out.status).toBe(200);
      // The copy, sent as it was before sign-out: refused at once here, and in the other process
      // as soon as the NOTIFY reaches it.
      expect((await me(srv.url)).status).toBe(401);
      await waitFor(async () => (await me(other.srv.url)).status, (s) => s === 401, { timeout_ms: 5000, what: 'the other process refusing the signed-out cookie' });
      expect((await h.ctx.db.pool.query(`SELECT revoked_at FROM sessions WHERE id = $1`, [row.id])).rows[0].revoked_at).toBeInstanceOf(Date);
    });

    it('a password change and a disable end every session of the user; a name change does not', async () => {
      const admin = await h.agent('admin');
      const u = await admin.post('/api/v1/users').send({ email: 'night@test.invalid', name: 'Night', role: 'operator', password: 'night-shift-password-1' });
      expect(u.status).toBe(201);
      const one = await signIn(srv.url, 'night@test.invalid', 'night-shift-password-1');
      const two = await signIn(srv.url, 'night@test.invalid', 'night-shift-password-1');
      const me = (c: string) => fetch(`${srv.url}/api/v1/auth/me`, { headers: { Cookie: c } }).then((r) => r.status);
      expect([await me(one), await me(two)]).toEqual([200, 200]);
      expect((await admin.patch(`/api/v1/users/${u.body.id}`).send({ name: 'Night shift' })).status).toBe(200);
      expect([await me(one), await me(two)]).toEqual([200, 200]);
      expect((await admin.patch(`/api/v1/users/${u.body.id}`).send({ password: 'a-new-night-password' })).status).toBe(200);
      expect([await me(one), await me(two)]).toEqual([401, 401]);

      const three = await signIn(srv.url, 'night@test.invalid', 'a-new-night-password');
      expect(await me(three)).toBe(200);
      expect((await admin.patch(`/api/v1/users/${u.body.id}`).send({ disabled: true })).status).toBe(200);
      expect((await admin.patch(`/api/v1/users/${u.body.id}`).send({ disabled: false })).status).toBe(200);
      // Re-enabled, but the session opened before the disable stays ended.
      expect(await me(three)).toBe(401);
    });

    it('a cookie signed with the right key but naming no session (or another user) is 401', async () => {
      const { signSession } = await import('../../server/auth/session.ts');
      const made = await signSession(h.ctx.sessionKey, h.users.admin.id, 'AAAAAAAAAAAAAAAAAAAAAA');
      expect((await request(h.app).get('/api/v1/auth/me').set('Cookie', `flocstream_session=${made}`)).status).toBe(401);
      const cookie = await signIn(srv.url, h.users.analyst.email, h.users.analyst.password);
      const sid = (await h.ctx.db.pool.query(`SELECT id FROM sessions WHERE user_id = $1 AND revoked_at IS NULL ORDER BY created_at DESC LIMIT 1`, [h.users.analyst.id])).rows[0].id;
      const elevated = await signSession(h.ctx.sessionKey, h.users.admin.id, sid);
      expect((await request(h.app).get('/api/v1/auth/me').set('Cookie', `flocstream_session=${elevated}`)).status).toBe(401);
      expect((await fetch(`${srv.url}/api/v1/auth/me`, { headers: { Cookie: cookie } })).status).toBe(200);
    });
  });

  describe('open streams', () => {
    it('a stream opened with a cookie closes when that session signs out (in another process too)', async () => {
      const cookie = await signIn(srv.url, h.users.analyst.email, h.users.analyst.password);
      const here = await openStream(srv.url, plantId, { Cookie: cookie });
      const there = await openStream(other.srv.url, plantId, { Cookie: cookie });
      expect((await fetch(`${srv.url}/api/v1/auth/logout`, { method: 'POST', headers: { Cookie: cookie, Origin: srv.url } })).status).toBe(200);
      expect(await endsWithin(here, 30_000)).toMatch(/: credentials revoked/);
      expect(await endsWithin(there, 30_000)).toMatch(/: credentials revoked/);
      // The browser's reconnection meets a 401.
      expect((await fetch(`${srv.url}/api/v1/plants/${plantId}/stream`, { headers: { Cookie: cookie } })).status).toBe(401);
    });

    it('a stream opened with a token closes when the token is revoked; another caller’s stream stays open', async () => {
      const op = await h.agent('operator');
      const made = await op.post('/api/v1/tokens').send({ name: 'stream-revoke', role: 'analyst', expiresInDays: 1 });
      expect(made.status).toBe(201);
      const byToken = await openStream(srv.url, plantId, { Authorization: `Bearer ${made.body.token as string}` });
      const bystander = await openStream(srv.url, plantId, { Cookie: await signIn(srv.url, h.users.integrator.email, h.users.integrator.password) });
      expect((await op.delete(`/api/v1/tokens/${made.body.id}`)).status).toBe(200);
      await endsWithin(byToken, 30_000);
      // The bystander's stream is still open: a balance announced now reaches it.
      const got = new Promise<void>((r) => bystander.res.on('data', (c: Buffer) => String(c).includes('event: balance') && r()));
      await h.ctx.db.pool.query(`SELECT pg_notify('flocstream_stream', $1)`, [JSON.stringify({ plantId, event: 'balance', data: { ok: true } })]);
      await got;
      bystander.res.destroy();
    });

    it('a session ended in the database without an announcement still closes its stream within 30 s (periodic re-check)', async () => {
      const cookie = await signIn(srv.url, h.users.operator.email, h.users.operator.password);
      const s = await openStream(srv.url, plantId, { Cookie: cookie });
      const sid = (await h.ctx.db.pool.query(`SELECT id FROM sessions WHERE user_id = $1 AND revoked_at IS NULL ORDER BY created_at DESC LIMIT 1`, [h.users.operator.id])).rows[0].id;
      await h.ctx.db.pool.query(`UPDATE sessions SET revoked_at = now() WHERE id = $1`, [sid]);
      expect(await endsWithin(s, 30_000)).toMatch(/: credentials revoked/);
    }, 40_000);
  });
});
