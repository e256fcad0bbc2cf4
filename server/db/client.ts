import { drizzle, type NodePgDatabase } from 'drizzle-orm/node-postgres';
import pg from 'pg';
import type { Logger } from 'pino';
import { PgListener } from './pg-listener.ts';
import * as schema from './schema/index.ts';

export type Db = NodePgDatabase<typeof schema>;

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
 * connections and are not bounded by it.
 */
export function openDatabase(url: string, opts: { max?: number; statementTimeout_ms?: number } = {}): Database {
  const pool = new pg.Pool({
    connectionString: url,
    max: opts.max ?? 10,
    idleTimeoutMillis: 30_000,
    ...(opts.statementTimeout_ms ? { statement_timeout: opts.statementTimeout_ms } : {}),
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
