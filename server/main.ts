import fs from 'node:fs';
import type { Server } from 'node:http';
import path from 'node:path';
import type { Logger } from 'pino';
import { createApp } from './app.ts';
import type { AppContext } from './app-context.ts';
import { loadSessionKey } from './auth/session.ts';
import type { Config } from './config.ts';
import { databaseUrls, openDatabase, type Database } from './db/client.ts';
import { startLocalPostgres, type LocalPostgres } from './db/local-postgres.ts';
import { grantRuntimeRoles, runMigrations } from './db/migrate.ts';
import { startBalanceEngine, type BalanceEngine } from './jobs/balance-engine.ts';
import { startHistoryJobs, type HistoryJobs } from './jobs/history-jobs.ts';
import { createLogger } from './logger.ts';
import { bootstrapUsers, type Credential } from './services/bootstrap.service.ts';

/** Getting a read-replica connection longer than this fails, and the read goes to the primary [ms]. */
const READ_REPLICA_CONNECT_TIMEOUT_MS = 5000;

export interface RunningServer {
  url: string;
  ctx: AppContext;
  /** The API's database URL (its own role); ingest's below. */
  databaseUrl: string;
  ingestDatabaseUrl: string;
  credentials: Credential[];
  close(): Promise<void>;
}

/**
 * Starts the API and monitor: the private PostgreSQL (unless DATABASE_URL is set), migrations,
 * first users, then HTTP on 127.0.0.1. `close()` stops them in reverse order.
 */
export async function startServer(config: Config, opts: { log?: Logger; say?: (m: string) => void; jobs?: boolean } = {}): Promise<RunningServer> {
  const say = opts.say ?? (() => {});
  const log = opts.log ?? createLogger('server', config.logLevel, config.dataDir);
  let pgLocal: LocalPostgres | undefined;
  if (!config.databaseUrl) pgLocal = await startLocalPostgres({ dataDir: config.dataDir, port: config.pgPort, log: say });
  let engine: BalanceEngine | undefined;
  let history: HistoryJobs | undefined;
  let readDb: Database | undefined;
  try {
    // Migrations as the owner; the API and ingest as roles with only what they need.
    const urls = databaseUrls(config, pgLocal);
    const databaseUrl = urls.api;
    await runMigrations(urls.owner);
    if (urls.roles) await grantRuntimeRoles(urls.owner, urls.roles);
    const db = openDatabase(databaseUrl, { statementTimeout_ms: config.apiStatementTimeout_ms });
    // The read routes' streaming replica, when one is configured (server/services/read-routing.service.ts).
    readDb = config.databaseReadUrl ? openDatabase(config.databaseReadUrl, { statementTimeout_ms: config.apiStatementTimeout_ms, connectTimeout_ms: READ_REPLICA_CONNECT_TIMEOUT_MS }) : undefined;
    const ctx: AppContext = { db, config, log, sessionKey: loadSessionKey(config.dataDir, config.sessionSecret), ...(readDb ? { readDb } : {}) };
    const credentials = await bootstrapUsers(ctx, config.demo);
    if (config.demo) rememberDemoCredentials(config.dataDir, credentials);
    // The balance engine (repeatable jobs, alarms, mail catcher) unless told not to (jobs: false).
    if (opts.jobs !== false) {
      // An ephemeral HTTP port (tests) gets an ephemeral catcher port too, so runs never collide.
      engine = await startBalanceEngine(ctx, { databaseUrl, ...(config.mailCatcherPort !== undefined ? { catcherPort: config.mailCatcherPort } : config.port === 0 ? { catcherPort: 0 } : {}) });
      if (engine.catcherUrl) say(`mail catcher at ${engine.catcherUrl} (admins read it at /api/v1/outbox)`);
      history = await startHistoryJobs(ctx, { databaseUrl });
    }
    const app = createApp(ctx);
    const server: Server = await new Promise((resolve, reject) => {
      const s = app.listen(config.port, config.host, () => resolve(s));
      s.once('error', (err: NodeJS.ErrnoException) =>
        reject(err.code === 'EADDRINUSE' ? new Error(`port ${config.port} on ${config.host} is already in use; set PORT to a free port`) : err),
      );
    });
    const addr = server.address();
    const port = typeof addr === 'object' && addr ? addr.port : config.port;
    return {
      url: `http://${config.host}:${port}`,
      ctx,
      databaseUrl,
      ingestDatabaseUrl: urls.ingest,
      credentials,
      async close() {
        server.closeAllConnections();
        await new Promise<void>((r) => server.close(() => r()));
        await history?.stop();
        await engine?.stop();
        await readDb?.close();
        await db.close();
        pgLocal?.stop();
      },
    };
  } catch (err) {
    await history?.stop().catch(() => {});
    await engine?.stop().catch(() => {});
    await readDb?.close().catch(() => {});
    pgLocal?.stop();
    throw err;
  }
}

/** Demo credentials are random; keep them (mode 600) in the data folder so a restart can show them again. */
function rememberDemoCredentials(dataDir: string, created: Credential[]): void {
  const file = path.join(dataDir, 'demo-credentials.json');
  const known: Credential[] = fs.existsSync(file) ? JSON.parse(fs.readFileSync(file, 'utf8')) : [];
  const merged = [...known.filter((k) => !created.some((c) => c.email === k.email)), ...created].filter((c) => c.email.startsWith('demo-'));
  fs.writeFileSync(file, JSON.stringify(merged, null, 2), { mode: 0o600 });
}

export function demoCredentials(dataDir: string): Credential[] {
  const file = path.join(dataDir, 'demo-credentials.json');
  return fs.existsSync(file) ? JSON.parse(fs.readFileSync(file, 'utf8')) : [];
}
