/**
 * `npm run dev`: what `npm start` runs, for working on the code. PostgreSQL, the broker, the
 * simulator and ingest run as under `npm start`; the API runs under `tsx watch` (scripts/api.ts)
 * and restarts when a file it imports changes (server/, shared/), on the same database; the
 * monitor is served from src/ by Vite with hot module replacement on 127.0.0.1:5173
 * (`--vite-port N` for another), `/api` proxied to the API (vite.config.ts). Ctrl-C stops
 * everything, PostgreSQL included.
 */
import { createRequire } from 'node:module';
import path from 'node:path';
import { parseArgs } from 'node:util';
import { createServer } from 'vite';
import { loadConfig } from '../server/config.ts';
import { startLocalPostgres } from '../server/db/local-postgres.ts';
import { waitForLine } from './children.ts';
import { API_READY, root, runLauncher, sayReady, startBroker, startIngest, startSimulator } from './launcher.ts';

/** tsx's command line (its package.json "bin"), run by Node like every other child. */
function tsxCli(): string {
  const require = createRequire(import.meta.url);
  const pkgFile = require.resolve('tsx/package.json');
  const bin = (require(pkgFile) as { bin: string | Record<string, string> }).bin;
  return path.relative(root, path.join(path.dirname(pkgFile), typeof bin === 'string' ? bin : bin.tsx!));
}

runLauncher('flocstream dev', async (l) => {
  const { values } = parseArgs({ options: { 'vite-port': { type: 'string' } } });
  const config = loadConfig();
  let databaseUrl = config.databaseUrl;
  let ingestUrl = config.ingestDatabaseUrl ?? databaseUrl;
  const apiEnv: Record<string, string> = {};
  if (!databaseUrl) {
    // Owned here, not by the API, so a reload of the API does not restart the database.
    const pg = await startLocalPostgres({ dataDir: config.dataDir, port: config.pgPort, log: l.say });
    l.onStop(() => pg.stop());
    databaseUrl = pg.url;
    ingestUrl = pg.ingestUrl;
    // The API migrates as the owner and serves as its own role, as under npm start (server/db/client.ts).
    Object.assign(apiEnv, { FLOCSTREAM_API_DATABASE_URL: pg.apiUrl, INGEST_DATABASE_URL: pg.ingestUrl });
  }
  const mqttUrl = await startBroker(l, config);

  const api = l.child('api', tsxCli(), ['watch', '--clear-screen=false', 'scripts/api.ts', '--mqtt-url', mqttUrl], { DATABASE_URL: databaseUrl, ...apiEnv });
  // The first start migrates and may create the cluster's users: give it as long as npm start has.
  const apiUrl = (await waitForLine(api.proc, 'api', API_READY, 120_000))[1]!;
  startSimulator(l, config, mqttUrl);
  startIngest(l, config, ingestUrl!);

  const vite = await createServer({
    configFile: path.join(root, 'vite.config.ts'),
    clearScreen: false,
    ...(values['vite-port'] ? { server: { port: Number(values['vite-port']) } } : {}),
  });
  l.onStop(() => vite.close());
  await vite.listen();
  const monitorUrl = vite.resolvedUrls?.local[0] ?? `http://127.0.0.1:${vite.config.server.port}/`;
  l.say(`monitor (Vite, hot reload) at ${monitorUrl}  /api proxied to the API at ${apiUrl}, which restarts when server/ or shared/ changes`);
  sayReady(l, config);
});
