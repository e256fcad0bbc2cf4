/**
 * Sign-in throttling (issue 15 item 7; OWASP Authentication Cheat Sheet, throttling and account
 * lockout): the attempt is reserved before the slow argon2id check, so parallel guesses cannot
 * slip past the limit; X-Forwarded-For counts only behind a configured proxy; and the recovery
 * command (`npm run admin`, scripts/admin.ts), run as a real process on the same database, gets
 * a locked-out admin back in.
 */
import { execFile } from 'node:child_process';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { promisify } from 'node:util';
import pino from 'pino';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createApp } from '../../server/app.ts';
import type { AppContext } from '../../server/app-context.ts';
import { loadConfig } from '../../server/config.ts';
import { openDatabase } from '../../server/db/client.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';
import { waitFor } from '../helpers/wait.ts';

const ROOT = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../..');
const run = promisify(execFile);

/** `npm run admin -- …` as the operator at the console would run it (same entry point as package.json's script). */
function admin(args: string[], databaseUrl: string) {
  return run(process.execPath, ['--import', 'tsx', 'scripts/admin.ts', ...args], { cwd: ROOT, env: { ...process.env, DATABASE_URL: databaseUrl }, timeout: 60_000 });
}

/** Five wrong passwords per account in 15 minutes (server/services/auth.service.ts). */
const LIMIT = 5;

describe('sign-in throttle and recovery', () => {
  let h: TestApp;

  beforeAll(async () => {
    h = await createTestApp();
    await h.ctx.db.listener(h.ctx.log).ready();
  });
  afterAll(async () => {
    await h?.close();
  });

  const login = (email: string, password: string, headers: Record<string, string> = {}) => request(h.app).post('/api/v1/auth/login').set(headers).send({ email, password });
  const failedChecks = async (email: string) => (await h.ctx.db.pool.query(`SELECT count(*)::int AS n FROM audit_log WHERE action = 'auth.login_failed' AND target = $1`, [email])).rows[0].n as number;

  it('20 parallel wrong guesses: exactly the limit are checked (401), the rest are refused before the hash (429)', async () => {
    const email = h.users.analyst.email;
    const answers = await Promise.all(Array.from({ length: 20 }, (_, i) => login(email, `wrong-guess-${i}`)));
    const statuses = answers.map((a) => a.status).sort();
    expect(statuses.filter((s) => s === 401)).toHaveLength(LIMIT);
    expect(statuses.filter((s) => s === 429)).toHaveLength(20 - LIMIT);
    // Every checked guess is audited; the refused ones never reached the password check.
    expect(await failedChecks(email)).toBe(LIMIT);
    for (const a of answers.filter((x) => x.status === 429)) expect(Number(a.headers['retry-after'])).toBeGreaterThan(0);
    // Locked: the right password is refused too, until the window passes or the recovery command runs.
    expect((await login(email, h.users.analyst.password)).status).toBe(429);
  });

  it('X-Forwarded-For is ignored by default: the audit log and the throttle see the socket address', async () => {
    const email = h.users.integrator.email;
    expect((await login(email, 'wrong-password-xff', { 'X-Forwarded-For': '203.0.113.9' })).status).toBe(401);
    const { ip } = (await h.ctx.db.pool.query(`SELECT ip FROM audit_log WHERE action = 'auth.login_failed' AND target = $1 ORDER BY id DESC LIMIT 1`, [email])).rows[0];
    expect(ip).not.toBe('203.0.113.9');
    expect(ip).toMatch(/127\.0\.0\.1|::1/);
  });

  it('with FLOCSTREAM_TRUST_PROXY=loopback the forwarded address is the client', async () => {
    const config = loadConfig({ DATABASE_URL: h.t.url, FLOCSTREAM_DEMO: '0', FLOCSTREAM_TRUST_PROXY: 'loopback', FLOCSTREAM_DATA_DIR: h.ctx.config.dataDir });
    expect(config.trustProxy).toBe('loopback');
    expect(loadConfig({}).trustProxy).toBe(false);
    const db = openDatabase(h.t.url);
    try {
      const ctx: AppContext = { ...h.ctx, config: { ...config, databaseUrl: h.t.url }, db, log: pino({ level: 'silent' }) };
      const proxied = createApp(ctx, { serveMonitor: false });
      const email = h.users.integrator.email;
      expect((await request(proxied).post('/api/v1/auth/login').set('X-Forwarded-For', '203.0.113.10').send({ email, password: 'wrong-password-proxy' })).status).toBe(401);
      const { ip } = (await h.ctx.db.pool.query(`SELECT ip FROM audit_log WHERE action = 'auth.login_failed' AND target = $1 ORDER BY id DESC LIMIT 1`, [email])).rows[0];
      expect(ip).toBe('203.0.113.10');
    } finally {
      await db.close();
    }
  });

  it('the last admin, locked out, gets back in with `npm run admin -- unlock`; `reset-password` gives a new password and ends the old sessions', async () => {
    const { email, password } = h.users.admin;
    const before = await h.agent('admin');
    expect((await h.ctx.db.pool.query(`SELECT count(*)::int AS n FROM users WHERE role = 'admin' AND NOT disabled`)).rows[0].n).toBe(1);
    for (let i = 0; i < LIMIT; i++) expect((await login(email, `attacker-guess-${i}`)).status).toBe(401);
    expect((await login(email, password)).status).toBe(429);

    const listed = await admin(['users'], h.t.url);
    expect(listed.stdout).toMatch(new RegExp(`${email.replace('.', '\\.')}\\s+admin\\s+active`));

    const unlocked = await admin(['unlock', email], h.t.url);
    expect(unlocked.stdout).toContain(`${email} unlocked`);
    // The running API hears it through NOTIFY flocstream_auth.
    await waitFor(async () => (await login(email, password)).status, (s) => s === 200, { timeout_ms: 10_000, what: 'sign-in after unlock' });

    for (let i = 0; i < LIMIT; i++) await login(email, `attacker-guess-again-${i}`);
    expect((await login(email, password)).status).toBe(429);
    const reset = await admin(['reset-password', email], h.t.url);
    const fresh = /^ {2}(\S+)$/m.exec(reset.stdout)?.[1];
    expect(fresh).toBeTruthy();
    expect(fresh).not.toBe(password);
    // The session opened before the reset is over; the old password no longer works; the new one does.
    expect((await before.get('/api/v1/auth/me')).status).toBe(401);
    await waitFor(async () => (await login(email, fresh!)).status, (s) => s === 200, { timeout_ms: 10_000, what: 'sign-in with the new password' });
    expect((await login(email, password)).status).toBe(401);
  }, 120_000);

  it('the recovery command says what is wrong: an unknown e-mail, a bad command', async () => {
    await expect(admin(['unlock', 'nobody@test.invalid'], h.t.url)).rejects.toMatchObject({ code: 2, stderr: expect.stringMatching(/no user with e-mail nobody@test\.invalid/) });
    await expect(admin(['explode'], h.t.url)).rejects.toMatchObject({ code: 2, stderr: expect.stringMatching(/usage: npm run admin/) });
  }, 60_000);
});
