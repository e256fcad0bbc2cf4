/**
 * `npm start`: the whole product on embedded defaults, in one terminal.
 * Builds the monitor when needed, starts the private PostgreSQL, migrates, creates the users,
 * starts the embedded MQTT broker, seeds the invented demo plant and runs its simulator, starts
 * ingest, and serves API + monitor on 127.0.0.1:3000. Ctrl-C stops everything.
 */
import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { BROKER_NODE_ARGS, BROKER_READY } from '../server/broker/process.ts';
import { loadConfig } from '../server/config.ts';
import { demoCredentials, startServer } from '../server/main.ts';
import { labResultInput } from '../shared/contracts/lab.ts';
import { labRow } from '../server/services/lab.service.ts';
import { labResults } from '../server/db/schema/index.ts';
import { plantModelRepository } from '../server/repositories/plant-model.repository.ts';
import { plantConfigService } from '../server/services/plant-config.service.ts';
import { DEMO_PLANT } from '../simulators/plant/demo-plant.ts';
import { DEMO_SOURCE_NAMES, kestrelBendConfig } from '../simulators/plant/kestrel-bend.config.ts';
import { buildMonitorIfNeeded } from './build-if-needed.ts';
import { spawnTs, waitForLine } from './children.ts';
import { INGEST_NODE_ARGS } from '../ingest/config.ts';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const say = (m: string) => console.log(`[flocstream] ${m}`);

async function main(): Promise<void> {
  const config = loadConfig();
  const stops: Array<() => Promise<void> | void> = [];
  let stopping = false;
  const stop = async (why: string, code = 0) => {
    if (stopping) return;
    stopping = true;
    say(`${why}: stopping…`);
    for (const s of stops.reverse()) {
      try {
        await s();
      } catch (err) {
        console.error(`[flocstream] while stopping: ${(err as Error).message}`);
      }
    }
    say('stopped; PostgreSQL is down and no process is left behind');
    process.exit(code);
  };
  process.on('SIGINT', () => void stop('SIGINT'));
  process.on('SIGTERM', () => void stop('SIGTERM'));

  try {
    buildMonitorIfNeeded(root, say);
    const server = await startServer(config, { say });
    stops.push(() => server.close());

    let mqttUrl = config.mqttUrl;
    if (!mqttUrl) {
      const broker = spawnTs(
        root,
        'broker',
        'server/broker/main.ts',
        ['127.0.0.1', String(config.mqttPort)],
        {},
        (code) => {
          if (!stopping) void stop(`the embedded broker exited (code ${code})`, 1);
        },
        BROKER_NODE_ARGS,
      );
      stops.push(() => broker.stop());
      mqttUrl = (await waitForLine(broker.proc, broker.name, BROKER_READY))[1]!;
    }

    if (config.demo) {
      const opcuaUrl = `opc.tcp://127.0.0.1:${config.simOpcuaPort}/flocstream-sim`;
      // The demo plant's configuration document goes through the service behind POST
      // /api/v1/plants; an existing plant with its code is left as it is, only its two demo
      // sources follow this run's ports.
      const plantConfig = plantConfigService(plantModelRepository(server.ctx.db.db));
      const seeded = await plantConfig.ensure(null, kestrelBendConfig({ mqttUrl, opcuaUrl }));
      if (!seeded.created) await plantConfig.setSourceUrls(null, seeded.plantId, { [DEMO_SOURCE_NAMES.mqtt]: mqttUrl, [DEMO_SOURCE_NAMES.opcua]: opcuaUrl });
      say(`${seeded.created ? 'seeded' : 'found'} the demo plant "${DEMO_PLANT.name}" (invented; plant id ${seeded.plantId})`);
      if (seeded.created) {
        // The settleability test is a lab entry, not a tag: the demo starts with one diluted
        // test (170 mL/L at 1:3, MLSS 3.4 g/L → DSVI 150 mL/g, the demo scenario's sludge), as an
        // operator would have entered it this morning, so the RAS limit has an SVI to work from.
        const entry = labResultInput.parse({ kind: 'DSVI', settledVolume_mLL: 170, dilutionFactor: 3, mlss_gL: 3.4, location: 'ab1', sampledAt: new Date(Date.now() - 3 * 3600_000).toISOString(), note: 'demo entry' });
        await server.ctx.db.db.insert(labResults).values(labRow(seeded.plantId, null, entry));
      }
      // Two simulated hours of history replayed fast (the demo storm starts half an hour in),
      // then real time: the board shows a storm within minutes and no timestamp is in the future.
      const simArgs = ['--scenario', config.simScenario, '--mqtt-url', mqttUrl, '--opcua-port', String(config.simOpcuaPort), '--data-dir', config.dataDir, '--catch-up-h', '2'];
      if (config.simSpeed) simArgs.push('--speed', String(config.simSpeed));
      const sim = spawnTs(root, 'simulator', 'simulators/cli.ts', simArgs, {}, (code) => {
        if (!stopping) void stop(`the simulator exited (code ${code})`, 1);
      });
      stops.push(() => sim.stop());
    }

    if (fs.existsSync(path.join(root, 'ingest/main.ts'))) {
      const ingest = spawnTs(
        root,
        'ingest',
        'ingest/main.ts',
        [],
        { DATABASE_URL: server.databaseUrl, FLOCSTREAM_DATA_DIR: config.dataDir },
        (code) => {
          if (!stopping) void stop(`ingest exited (code ${code})`, 1);
        },
        INGEST_NODE_ARGS,
      );
      stops.push(() => ingest.stop());
    }

    say(`monitor and API at ${server.url}  (OpenAPI: ${server.url}/api/v1/openapi.json)`);
    for (const c of server.credentials.filter((c) => !c.email.startsWith('demo-'))) {
      say(`first admin: ${c.email}  password: ${c.password}  (shown once)`);
    }
    if (config.demo) {
      say('demo users (random passwords, kept in .data/demo-credentials.json):');
      for (const c of demoCredentials(config.dataDir)) say(`  ${c.role.padEnd(10)} ${c.email}  ${c.password}`);
    }
    say('advisory only: Flocstream never writes to the control system. Press Ctrl-C to stop.');
  } catch (err) {
    console.error(`[flocstream] cannot start: ${(err as Error).message}`);
    await stop('start-up failed', 1);
  }
}

void main();
