import { randomBytes } from 'node:crypto';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pino from 'pino';
import request from 'supertest';
import type { Express } from 'express';
import { ROLES, type Role } from '../../shared/contracts/roles.ts';
import { createApp } from '../../server/app.ts';
import type { AppContext } from '../../server/app-context.ts';
import { hashPassword } from '../../server/auth/passwords.ts';
import { loadConfig } from '../../server/config.ts';
import { openDatabase } from '../../server/db/client.ts';
import { userRepository } from '../../server/repositories/user.repository.ts';
import { createTestDatabase, type TestDatabase } from './db.ts';

export interface TestApp {
  app: Express;
  ctx: AppContext;
  t: TestDatabase;
  /** One user per role, password `password`. */
  users: Record<Role, { id: number; email: string; password: string }>;
  /** A supertest agent already signed in as that role (session cookie). */
  agent(role: Role): Promise<ReturnType<typeof request.agent>>;
  close(): Promise<void>;
}

export async function createTestApp(): Promise<TestApp> {
  const t = await createTestDatabase();
  const dataDir = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-app-'));
  const config = { ...loadConfig({ FLOCSTREAM_DATA_DIR: dataDir, DATABASE_URL: t.url, FLOCSTREAM_DEMO: '0' }), databaseUrl: t.url };
  const db = openDatabase(t.url);
  const ctx: AppContext = { db, config, log: pino({ level: 'silent' }), sessionKey: randomBytes(32) };
  const repo = userRepository(db.db);
  const users = {} as TestApp['users'];
  for (const role of ROLES) {
    const email = `${role}@test.invalid`;
    const password = `pw-${role}-${randomBytes(6).toString('hex')}`;
    const row = await repo.insert({ email, name: role, role, passwordHash: await hashPassword(password) });
    users[role] = { id: row!.id, email, password };
  }
  const app = createApp(ctx, { serveMonitor: false });
  return {
    app,
    ctx,
    t,
    users,
    async agent(role) {
      // A browser on the monitor's own page sends this on every request; the CSRF guard
      // (server/auth/csrf.ts) refuses cookie-authenticated writes without it or a matching Origin.
      const a = request.agent(app).set('Sec-Fetch-Site', 'same-origin');
      const r = await a.post('/api/v1/auth/login').send({ email: users[role].email, password: users[role].password });
      if (r.status !== 200) throw new Error(`login as ${role} failed: ${r.status} ${JSON.stringify(r.body)}`);
      return a;
    },
    async close() {
      await db.close();
      await t.drop();
      fs.rmSync(dataDir, { recursive: true, force: true });
    },
  };
}
