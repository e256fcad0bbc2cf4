import { drizzle, type NodePgDatabase } from 'drizzle-orm/node-postgres';
import pg from 'pg';
import type { Logger } from 'pino';
import type { Config } from '../config.ts';
import type { LocalPostgres } from './local-postgres.ts';
import type { RuntimeRoles } from './migrate.ts';
import { PgListener } from './pg-listener.ts';
import * as schema from './schema/index.ts';

export type Db = NodePgDatabase<typeof schema>;
/** The database handle or an open transaction (what `db.transaction` hands its callback). */
export type DbOrTx = Db | Parameters<Parameters<Db['transaction']>[0]>[0];

export interface Database {
  pool: pg.Pool;
  db: Db;
  /** The one LISTEN connection of this database (made on first call, ended by `close()`). */
  listener(log: Logger): PgListener;
  close(): Promise<void>;
}

// timestamptz as JS Date (default), bigint counts as numbers (they stay well below 2^53).
pg.types.setTypeParser(20, (v) => Number(v));

/**
 * `statementTimeout_ms` sets PostgreSQL's statement_timeout on every connection of the pool (a
 * startup parameter, so it holds per connection from the first query): the API's pool gets
 * `config.apiStatementTimeout_ms`, so no request can hold a connection and the database for
 * longer; a cancelled statement fails with SQLSTATE 57014. Ingest and migrations open their own
 * connections and are not bounded by it. `connectTimeout_ms` bounds getting a connection (the
 * read replica's pool: an unreachable host fails fast and the read goes to the primary).
 */
export function openDatabase(url: string, opts: { max?: number; statementTimeout_ms?: number; connectTimeout_ms?: number } = {}): Database {
  const pool = new pg.Pool({
    connectionString: url,
    max: opts.max ?? 10,
    idleTimeoutMillis: 30_000,
    ...(opts.statementTimeout_ms ? { statement_timeout: opts.statementTimeout_ms } : {}),
    // node-postgres counts the wait for a free pooled connection in this too.
    ...(opts.connectTimeout_ms ? { connectionTimeoutMillis: opts.connectTimeout_ms } : {}),
  });
  // An idle client losing its connection (database restart) must not crash the process.
  pool.on('error', () => {});
  const db = drizzle(pool, { schema });
  let listener: PgListener | undefined;
  return {
    pool,
    db,
    listener: (log) => (listener ??= new PgListener(url, log)),
    close: async () => {
      await listener?.stop();
      await pool.end();
    },
  };
}

/** Which role each part of the product connects as. */
export interface DatabaseUrls {
  /** The owner: migrations and grants only. */
  owner: string;
  api: string;
  ingest: string;
  /** The roles to grant to after migrating; null when the API and ingest connect as the owner. */
  roles: RuntimeRoles | null;
}

/**
 * The private cluster: the owner (postgres) migrates, the API and ingest use their own roles
 * (local-postgres.ts RUNTIME_ROLES). An external DATABASE_URL is the owner; with
 * FLOCSTREAM_API_DATABASE_URL and INGEST_DATABASE_URL (both, roles a DBA created) the API and
 * ingest connect as those and are granted their privileges after each migration; without them
 * everything connects as DATABASE_URL, as before.
 */
export function databaseUrls(config: Pick<Config, 'databaseUrl' | 'apiDatabaseUrl' | 'ingestDatabaseUrl'>, local?: LocalPostgres): DatabaseUrls {
  if (local) return { owner: local.url, api: local.apiUrl, ingest: local.ingestUrl, roles: local.roles };
  const owner = config.databaseUrl;
  if (!owner) throw new Error('DATABASE_URL is not set and no private cluster was started');
  const { apiDatabaseUrl: api, ingestDatabaseUrl: ingest } = config;
  if (!api !== !ingest) throw new Error('set both FLOCSTREAM_API_DATABASE_URL and INGEST_DATABASE_URL, or neither');
  if (!api || !ingest) return { owner, api: owner, ingest: owner, roles: null };
  const user = (u: string) => decodeURIComponent(new URL(u).username);
  return { owner, api, ingest, roles: { api: user(api), ingest: user(ingest) } };
}
