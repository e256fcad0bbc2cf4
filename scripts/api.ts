/**
 * The API alone, as `npm run dev` runs it under `tsx watch` (restarted when a file it imports
 * changes). The dev launcher owns PostgreSQL, the broker, the simulator and ingest, and passes
 * DATABASE_URL and the broker URL; this process migrates, seeds, runs the balance engine and
 * serves HTTP, and prints the line API_READY matches once it listens.
 */
import { parseArgs } from 'node:util';
import { loadConfig } from '../server/config.ts';
import { sayNewAdmin, startApi } from './launcher.ts';

const say = (m: string) => console.log(m);
const { values } = parseArgs({ options: { 'mqtt-url': { type: 'string' } } });
const config = loadConfig();
if (!config.databaseUrl) throw new Error('scripts/api.ts needs DATABASE_URL (npm run dev sets it)');

try {
  const server = await startApi(config, values['mqtt-url'] ?? config.mqttUrl ?? `mqtt://127.0.0.1:${config.mqttPort}`, say);
  let closing = false;
  // tsx watch sends SIGTERM before a restart (SIGKILL after 5 s); a terminal's Ctrl-C sends SIGINT.
  const close = () => {
    if (closing) return;
    closing = true;
    void server.close().then(
      () => process.exit(0),
      (err: unknown) => {
        console.error(`while closing: ${(err as Error).message}`);
        process.exit(1);
      },
    );
  };
  process.on('SIGTERM', close);
  process.on('SIGINT', close);
  sayNewAdmin(say, server);
  say(`API listening at ${server.url}`);
} catch (err) {
  // Under tsx watch a failed start waits for the next save instead of taking the launcher down.
  console.error(`API cannot start: ${(err as Error).message}`);
  process.exit(1);
}
