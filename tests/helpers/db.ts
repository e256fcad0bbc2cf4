import { randomBytes } from 'node:crypto';
import pg from 'pg';
import { inject } from 'vitest';

export interface TestDatabase {
  url: string;
  name: string;
  /** Superuser URL of the throwaway cluster (for stopping/terminating in outage tests). */
  adminUrl: string;
  drop(): Promise<void>;
}

/** A fresh, migrated database cloned from the template that tests/setup/global-db.ts prepared. */
export async function createTestDatabase(): Promise<TestDatabase> {
  const adminUrl = inject('pgAdminUrl');
  const template = inject('pgTemplateDb');
  const name = `t_${randomBytes(6).toString('hex')}`;
  const c = new pg.Client({ connectionString: adminUrl });
  await c.connect();
  try {
    await c.query(`CREATE DATABASE "${name}" TEMPLATE "${template}"`);
  } finally {
    await c.end();
  }
  const url = adminUrl.replace(/\/postgres$/, `/${name}`);
  return {
    url,
    name,
    adminUrl,
    async drop() {
      const d = new pg.Client({ connectionString: adminUrl });
      await d.connect();
      try {
        await d.query(`DROP DATABASE IF EXISTS "${name}" WITH (FORCE)`);
      } finally {
        await d.end();
      }
    },
  };
}

/** The throwaway cluster's data folder (its pg/ and pgsock/ live there). */
export function testDataDir(): string {
  return inject('testDataDir');
}
