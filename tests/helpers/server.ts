import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pino from 'pino';
import { loadConfig } from '../../server/config.ts';
import { startServer, type RunningServer } from '../../server/main.ts';
import { createTestDatabase, type TestDatabase } from './db.ts';

/**
 * The real server (API + built monitor) on a random port against a fresh test database.
 * `jobs: false` leaves out the scheduled balance engine, for tests that run it themselves.
 */
export async function startTestServer(env: Record<string, string> = {}, opts: { jobs?: boolean } = {}): Promise<{ server: RunningServer; t: TestDatabase; close(): Promise<void> }> {
  const t = await createTestDatabase();
  const dataDir = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-e2e-'));
  const config = { ...loadConfig({ FLOCSTREAM_DATA_DIR: dataDir, DATABASE_URL: t.url, FLOCSTREAM_DEMO: '1', ...env }), port: 0 };
  const server = await startServer(config, { log: pino({ level: 'silent' }), ...(opts.jobs === false ? { jobs: false } : {}) });
  return {
    server,
    t,
    async close() {
      await server.close();
      await t.drop();
      fs.rmSync(dataDir, { recursive: true, force: true });
    },
  };
}
