/**
 * The API alone in a process of its own, for tests that measure how it answers under load
 * without the test's own work on the same event loop. Configured from the environment like
 * `npm start` (server/config.ts); no balance engine. Prints `listening <url>` when ready and
 * stops on SIGTERM.
 */
import pino from 'pino';
import { loadConfig } from '../../server/config.ts';
import { startServer } from '../../server/main.ts';

const server = await startServer({ ...loadConfig(), port: 0 }, { log: pino({ level: 'silent' }), jobs: false });
process.stdout.write(`listening ${server.url}\n`);
process.once('SIGTERM', () => {
  void server.close().finally(() => process.exit(0));
});
