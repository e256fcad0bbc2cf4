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

export function openDatabase(url: string, opts: { max?: number } = {}): Database {
  const pool = new pg.Pool({ connectionString: url, max: opts.max ?? 10, idleTimeoutMillis: 30_000 });
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
