/**
 * The API alone in a process of its own, for tests that measure how it answers under load
 * without the test's own work on the same event loop. Configured from the environment like
 * `npm start` (server/config.ts); no balance engine unless started with `--jobs` (then the
 * balance engine and the history worker run as under `npm start`, for tests of several API
 * processes on one database). Prints `listening <url>` when ready and stops on SIGTERM.
 */
import pino from 'pino';
import { loadConfig } from '../../server/config.ts';
import { startServer } from '../../server/main.ts';

const server = await startServer({ ...loadConfig(), port: 0 }, { log: pino({ level: 'silent' }), jobs: process.argv.includes('--jobs') });
process.stdout.write(`listening ${server.url}\n`);
process.once('SIGTERM', () => {
  void server.close().finally(() => process.exit(0));
});
