import type { Logger } from 'pino';
import type { Config } from './config.ts';
import type { Database } from './db/client.ts';

/** What every route module and service gets: passed in, never imported as a global. */
export interface AppContext {
  db: Database;
  config: Config;
  log: Logger;
  /** Secret that signs session JWTs (HS256). */
  sessionKey: Uint8Array;
}
