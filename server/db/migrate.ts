import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { drizzle } from 'drizzle-orm/node-postgres';
import { migrate } from 'drizzle-orm/node-postgres/migrator';
import pg from 'pg';

export const MIGRATIONS_DIR = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../../drizzle');

/** Apply the committed SQL migrations with a single connection of its own. */
export async function runMigrations(url: string): Promise<void> {
  const client = new pg.Client({ connectionString: url });
  await client.connect();
  try {
    // Serialize concurrent starters (tests, a second process) on one advisory lock.
    await client.query('SELECT pg_advisory_lock(7317001)');
    await migrate(drizzle(client), { migrationsFolder: MIGRATIONS_DIR });
  } finally {
    await client.query('SELECT pg_advisory_unlock(7317001)').catch(() => {});
    await client.end();
  }
}

// `npm run db:migrate`: against DATABASE_URL, or the private cluster (started, migrated, stopped).
if (process.argv[1] && fileURLToPath(import.meta.url) === path.resolve(process.argv[1])) {
  const { loadConfig } = await import('../config.ts');
  const { startLocalPostgres } = await import('./local-postgres.ts');
  const cfg = loadConfig();
  let stop = () => {};
  let url = cfg.databaseUrl;
  try {
    if (!url) {
      const pgLocal = await startLocalPostgres({ dataDir: cfg.dataDir, port: cfg.pgPort, log: (m) => console.log(m) });
      url = pgLocal.url;
      stop = () => pgLocal.stop();
    }
    await runMigrations(url);
    console.log('migrations applied');
    stop();
  } catch (err) {
    console.error(`migration failed: ${(err as Error).message}`);
    stop();
    process.exit(1);
  }
}
