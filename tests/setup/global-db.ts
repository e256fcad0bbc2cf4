import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pg from 'pg';
import type { TestProject } from 'vitest/node';
import { startLocalPostgres, type LocalPostgres } from '../../server/db/local-postgres.ts';
import { runMigrations } from '../../server/db/migrate.ts';

/**
 * A throwaway private cluster for the integration and browser tests: its own folder under the
 * system temp dir, its own port, never the demo data. Migrations are applied once to a template
 * database; each test file clones it (tests/helpers/db.ts) so files never see each other's rows.
 */
declare module 'vitest' {
  export interface ProvidedContext {
    pgAdminUrl: string;
    pgTemplateDb: string;
    testDataDir: string;
  }
}

let cluster: LocalPostgres | undefined;
let dir: string | undefined;

export async function setup(project: TestProject): Promise<void> {
  dir = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-test-'));
  const port = 55000 + Math.floor(Math.random() * 2000);
  cluster = await startLocalPostgres({ dataDir: dir, port, dbName: 'flocstream_template' });
  await runMigrations(cluster.url);
  const admin = cluster.url.replace(/\/flocstream_template$/, '/postgres');
  project.provide('pgAdminUrl', admin);
  project.provide('pgTemplateDb', 'flocstream_template');
  project.provide('testDataDir', dir);
  // The template must have no open connections for CREATE DATABASE … TEMPLATE.
  const c = new pg.Client({ connectionString: admin });
  await c.connect();
  await c.query(`SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE datname = 'flocstream_template' AND pid <> pg_backend_pid()`);
  await c.end();
}

export async function teardown(): Promise<void> {
  try {
    cluster?.stop();
  } finally {
    if (dir) fs.rmSync(dir, { recursive: true, force: true });
  }
}
