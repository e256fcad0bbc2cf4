/**
 * `npm start`: the whole product on embedded defaults, in one terminal.
 * Builds the monitor when needed, starts the embedded MQTT broker, the private PostgreSQL,
 * migrates, creates the users, seeds the invented demo plant and runs its simulator, starts
 * ingest, and serves API + monitor on 127.0.0.1:3000. Ctrl-C stops everything.
 */
import path from 'node:path';
import { loadConfig } from '../server/config.ts';
import { buildMonitorIfNeeded } from './build-if-needed.ts';
import { loadDemoHistory, prepareDemoHistory, raiseProcessAlarm, root, runLauncher, sayNewAdmin, sayReady, startApi, startBroker, startIngest, startSimulator } from './launcher.ts';

runLauncher('flocstream', async (l) => {
  const config = loadConfig();
  const history = prepareDemoHistory(config);
  buildMonitorIfNeeded(root, l.say);
  const mqttUrl = await startBroker(l, config);
  const server = await startApi(config, mqttUrl, l.say);
  l.onStop(() => server.close());
  l.onChildExit((e) => raiseProcessAlarm(server.ctx, e));
  startSimulator(l, config, mqttUrl, await loadDemoHistory(config, server, l.say, history));
  startIngest(l, config, server.ingestDatabaseUrl);
  l.say(`monitor and API at ${server.url}  (OpenAPI: ${server.url}/api/v1/openapi.json)`);
  l.say(`logs: ${path.join(config.dataDir, 'logs')} (server.log, ingest.log; warnings and errors also here)`);
  sayNewAdmin(l.say, server);
  sayReady(l, config);
});
