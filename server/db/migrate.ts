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

/** Roles the API and ingest connect as (names of existing roles; server/db/client.ts databaseUrls). */
export interface RuntimeRoles {
  api: string;
  ingest: string;
}

/**
 * What ingest may do, table by table (least privilege, allow-list): it writes samples, rollups,
 * latest values, dead letters, its heartbeat, MQTT discovery and the OPC UA client identity,
 * reads its wiring, and may raise its own alarms. Nothing else — users, api_tokens, sessions,
 * audit_log, mail — so a compromised ingest host reads no credential. A table a later migration
 * adds for ingest must be added here; one that does not exist yet is skipped.
 */
export const INGEST_TABLE_GRANTS: Record<string, string> = {
  samples: 'SELECT, INSERT',
  rollup_1m: 'SELECT, INSERT, UPDATE',
  rollup_1h: 'SELECT, INSERT, UPDATE',
  tag_latest: 'SELECT, INSERT, UPDATE',
  dead_letters: 'SELECT, INSERT, UPDATE',
  ingest_workers: 'SELECT, INSERT, UPDATE, DELETE',
  mqtt_discovery: 'SELECT, INSERT, UPDATE, DELETE',
  source_leases: 'SELECT, INSERT, UPDATE, DELETE',
  opcua_client_identity: 'SELECT, INSERT',
  sources: 'SELECT',
  tags: 'SELECT, UPDATE',
  signal_map: 'SELECT',
  plants: 'SELECT',
  alarms: 'SELECT, INSERT, UPDATE',
};

/** The job queue's schema (BullMQ's PostgreSQL backend creates and migrates its own tables there). */
const JOB_SCHEMA = 'bullmq';

const ident = (s: string) => `"${s.replace(/"/g, '""')}"`;

/**
 * Run as the owner after the migrations, every start (so tables of later migrations are covered):
 * the API may read and write every table of `public` but not create, alter or drop one (it owns
 * only the job queue's schema, whose tables BullMQ creates and alters at run time, and may create
 * schemas of its own); ingest gets
 * INGEST_TABLE_GRANTS only. `ALTER DEFAULT PRIVILEGES` gives the API the tables the owner creates
 * later even before this step runs again. Idempotent.
 */
export async function grantRuntimeRoles(ownerUrl: string, roles: RuntimeRoles): Promise<void> {
  const client = new pg.Client({ connectionString: ownerUrl });
  await client.connect();
  const api = ident(roles.api);
  const ingest = ident(roles.ingest);
  try {
    await client.query('SELECT pg_advisory_lock(7317001)');
    const q = (sql: string) => client.query(sql);
    const dbName = ident((await q('SELECT current_database() AS d')).rows[0].d as string);
    await q(`GRANT CONNECT, TEMPORARY ON DATABASE ${dbName} TO ${api}, ${ingest}`);
    // BullMQ's migrator runs CREATE SCHEMA IF NOT EXISTS, which PostgreSQL checks against the
    // database's CREATE privilege even when the schema exists. CREATE on a database allows new
    // schemas only: nothing in public can be altered or dropped with it.
    await q(`GRANT CREATE ON DATABASE ${dbName} TO ${api}`);
    await q(`GRANT USAGE ON SCHEMA public TO ${api}, ${ingest}`);
    await q(`GRANT SELECT, INSERT, UPDATE, DELETE ON ALL TABLES IN SCHEMA public TO ${api}`);
    await q(`GRANT USAGE, SELECT, UPDATE ON ALL SEQUENCES IN SCHEMA public TO ${api}`);
    await q(`GRANT EXECUTE ON ALL FUNCTIONS IN SCHEMA public TO ${api}`);
    await q(`ALTER DEFAULT PRIVILEGES IN SCHEMA public GRANT SELECT, INSERT, UPDATE, DELETE ON TABLES TO ${api}`);
    await q(`ALTER DEFAULT PRIVILEGES IN SCHEMA public GRANT USAGE, SELECT, UPDATE ON SEQUENCES TO ${api}`);
    // Ingest: its tables and the sequences they own, nothing else (a grant once given is revoked
    // when a table leaves the list).
    const tables = (await q(`SELECT c.relname FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace WHERE n.nspname = 'public' AND c.relkind IN ('r', 'p') AND NOT c.relispartition`)).rows.map((r) => r.relname as string);
    for (const t of tables) {
      const grant = INGEST_TABLE_GRANTS[t];
      await q(`REVOKE ALL ON TABLE ${ident(t)} FROM ${ingest}`);
      if (grant) await q(`GRANT ${grant} ON TABLE ${ident(t)} TO ${ingest}`);
    }
    const seqs = await q(
      `SELECT s.relname AS seq, t.relname AS tbl FROM pg_class s JOIN pg_namespace n ON n.oid = s.relnamespace
         LEFT JOIN pg_depend d ON d.objid = s.oid AND d.deptype IN ('a', 'i') LEFT JOIN pg_class t ON t.oid = d.refobjid
        WHERE n.nspname = 'public' AND s.relkind = 'S'`,
    );
    for (const r of seqs.rows as Array<{ seq: string; tbl: string | null }>) {
      const write = r.tbl !== null && /INSERT/.test(INGEST_TABLE_GRANTS[r.tbl] ?? '');
      await q(`${write ? 'GRANT' : 'REVOKE'} USAGE ON SEQUENCE ${ident(r.seq)} ${write ? 'TO' : 'FROM'} ${ingest}`);
    }
    await q(`GRANT EXECUTE ON FUNCTION flocstream_ensure_day_partition(timestamptz), flocstream_drop_partitions_before(timestamptz) TO ${ingest}`);
    // The job queue: a schema the API owns, so BullMQ can migrate it and make its per-queue
    // sequences. One created by an older version as the owner is handed over with its objects.
    const owner = (await q(`SELECT pg_get_userbyid(nspowner) AS o FROM pg_namespace WHERE nspname = '${JOB_SCHEMA}'`)).rows[0]?.o as string | undefined;
    if (owner === undefined) await q(`CREATE SCHEMA ${JOB_SCHEMA} AUTHORIZATION ${api}`);
    else if (owner !== roles.api) {
      await q(`ALTER SCHEMA ${JOB_SCHEMA} OWNER TO ${api}`);
      await q(`DO $$ DECLARE r record; BEGIN
        FOR r IN SELECT c.oid::regclass AS n FROM pg_class c JOIN pg_namespace s ON s.oid = c.relnamespace
                  WHERE s.nspname = '${JOB_SCHEMA}' AND c.relkind IN ('r', 'p', 'S', 'v') AND NOT EXISTS (SELECT 1 FROM pg_depend d WHERE d.objid = c.oid AND d.deptype IN ('a', 'i'))
        LOOP EXECUTE format('ALTER TABLE %s OWNER TO ${api.replace(/'/g, "''")}', r.n); END LOOP;
        FOR r IN SELECT p.oid::regprocedure AS n FROM pg_proc p JOIN pg_namespace s ON s.oid = p.pronamespace WHERE s.nspname = '${JOB_SCHEMA}'
        LOOP EXECUTE format('ALTER ROUTINE %s OWNER TO ${api.replace(/'/g, "''")}', r.n); END LOOP;
        FOR r IN SELECT t.oid::regtype AS n FROM pg_type t JOIN pg_namespace s ON s.oid = t.typnamespace WHERE s.nspname = '${JOB_SCHEMA}' AND t.typtype = 'e'
        LOOP EXECUTE format('ALTER TYPE %s OWNER TO ${api.replace(/'/g, "''")}', r.n); END LOOP;
      END $$`);
    }
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
  const { databaseUrls } = await import('./client.ts');
  let stop = () => {};
  try {
    const pgLocal = cfg.databaseUrl ? undefined : await startLocalPostgres({ dataDir: cfg.dataDir, port: cfg.pgPort, log: (m) => console.log(m) });
    if (pgLocal) stop = () => pgLocal.stop();
    const urls = databaseUrls(cfg, pgLocal);
    await runMigrations(urls.owner);
    if (urls.roles) await grantRuntimeRoles(urls.owner, urls.roles);
    console.log('migrations applied');
    stop();
  } catch (err) {
    console.error(`migration failed: ${(err as Error).message}`);
    stop();
    process.exit(1);
  }
}
