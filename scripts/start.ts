/**
 * `npm start`: the whole product on embedded defaults, in one terminal.
 * Builds the monitor when needed, starts the private PostgreSQL, migrates, seeds the demo
 * plant and users, then serves API + monitor on 127.0.0.1:3000. Ctrl-C stops everything.
 */
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { loadConfig } from '../server/config.ts';
import { demoCredentials, startServer } from '../server/main.ts';
import { buildMonitorIfNeeded } from './build-if-needed.ts';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const say = (m: string) => console.log(`[flocstream] ${m}`);

async function main(): Promise<void> {
  const config = loadConfig();
  buildMonitorIfNeeded(root, say);
  const server = await startServer(config, { say });
  const stops: Array<() => Promise<void> | void> = [() => server.close()];

  let stopping = false;
  const stop = async (signal: string) => {
    if (stopping) return;
    stopping = true;
    say(`${signal}: stopping…`);
    for (const s of stops.reverse()) {
      try {
        await s();
      } catch (err) {
        console.error(`[flocstream] while stopping: ${(err as Error).message}`);
      }
    }
    say('stopped; PostgreSQL is down and no process is left behind');
    process.exit(0);
  };
  process.on('SIGINT', () => void stop('SIGINT'));
  process.on('SIGTERM', () => void stop('SIGTERM'));

  say(`monitor and API at ${server.url}  (OpenAPI: ${server.url}/api/v1/openapi.json)`);
  for (const c of server.credentials.filter((c) => !c.email.startsWith('demo-'))) {
    say(`first admin: ${c.email}  password: ${c.password}  (shown once)`);
  }
  if (config.demo) {
    say('demo users (random passwords, kept in .data/demo-credentials.json):');
    for (const c of demoCredentials(config.dataDir)) say(`  ${c.role.padEnd(10)} ${c.email}  ${c.password}`);
  }
  say('advisory only: Flocstream never writes to the control system. Press Ctrl-C to stop.');
}

main().catch((err: Error) => {
  console.error(`[flocstream] cannot start: ${err.message}`);
  process.exit(1);
});
