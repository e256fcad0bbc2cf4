/**
 * `npm run ingest`: one more ingest worker on this host, against the database `npm start` uses —
 * DATABASE_URL (INGEST_DATABASE_URL when set), or else the private cluster of
 * FLOCSTREAM_DATA_DIR, which must already run (`npm start` runs it). The worker reads its sources
 * and brokers from the database, takes its share of them (ingest/source-leases.ts), has a data
 * folder of its own for its spool and log (`<dataDir>/ingest-workers/<n>`), and is restarted
 * when it exits, like the workers of `npm start`. Ctrl-C stops it (final flush).
 */
import { loadConfig } from '../server/config.ts';
import { databaseUrls } from '../server/db/client.ts';
import { startLocalPostgres } from '../server/db/local-postgres.ts';
import { INGEST_NODE_ARGS } from '../ingest/config.ts';
import { claimWorkerDir, runLauncher } from './launcher.ts';

runLauncher('ingest', async (l) => {
  const config = loadConfig();
  let url: string;
  if (config.databaseUrl) url = databaseUrls(config).ingest;
  else {
    const local = await startLocalPostgres({ dataDir: config.dataDir, port: config.pgPort });
    if (local.startedHere) {
      local.stop();
      throw new Error(`the private PostgreSQL of ${config.dataDir} is not running: start the product (npm start) first, or set DATABASE_URL`);
    }
    url = local.ingestUrl;
  }
  const dir = claimWorkerDir(config.dataDir);
  l.supervised('ingest', 'ingest/main.ts', [], { DATABASE_URL: url, FLOCSTREAM_DATA_DIR: dir }, INGEST_NODE_ARGS);
  l.say(`ingest worker running (data folder ${dir}, log in ${dir}/logs/ingest.log); Ctrl-C stops it`);
});
