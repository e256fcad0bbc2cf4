/**
 * npm run sim -- --scenario storm --speed 60 [--seed N] [--mqtt-url URL | --no-mqtt]
 *                [--mqtt-username U --mqtt-password-file F]
 *                [--opcua-port P | --no-opcua] [--batch] [--data-dir D] [--catch-up-h H | --resume-from ISO] [--list]
 * npm run sim -- --scenario dry-weather --history-days 35 --history-out FILE [--history-end ISO] [--history-step-s S]
 *
 * --history-days D --history-out FILE writes D days of the plant's past ending at --history-end
 * (default now) as a long-layout CSV for the product's historian import, then exits; nothing is
 * published. --resume-from ISO starts the simulated clock at that time (the last sample a
 * previous run stored) and catches up to the wall clock, so no start writes into a window that
 * already holds data.
 *
 * --catch-up-h H starts the simulated clock H hours ago and runs at --speed until it meets the
 * wall clock, then in real time (timestamps never lie in the future).
 *
 * Broker credentials: a user name and a file holding only the password (never the password on
 * the command line, where `ps` shows it to every user of the host); `npm start` passes the
 * embedded broker's `simulator` user and `<dataDir>/broker/simulator.password`.
 *
 * Prints one line with the MQTT and OPC UA endpoints, then runs until SIGINT/SIGTERM.
 * The simulator publishes to a broker; it does not start one (the product's launcher starts
 * the embedded broker, or point --mqtt-url at any MQTT 3.1.1/5 broker).
 */
import fs from 'node:fs';
import { parseArgs } from 'node:util';
import { z } from 'zod';
import { DEFAULT_MQTT_URL, DEFAULT_OPCUA_PORT, startSimulator } from './simulator.js';
import { listScenarios, ScenarioError } from './scenarios/load-scenario.js';
import { exportHistory } from './history-export.js';

const argsSchema = z.object({
  scenario: z.string().min(1),
  speed: z.coerce.number().min(1).max(3600).optional(),
  seed: z.coerce.number().int().min(0).max(0xffffffff).default(1),
  'mqtt-url': z.string().regex(/^mqtts?:\/\/|^wss?:\/\//, 'must be an mqtt://, mqtts://, ws:// or wss:// URL').default(DEFAULT_MQTT_URL),
  'no-mqtt': z.boolean().default(false),
  'mqtt-username': z.string().min(1).max(256).optional(),
  'mqtt-password-file': z.string().min(1).optional(),
  'opcua-port': z.coerce.number().int().min(1).max(65535).default(DEFAULT_OPCUA_PORT),
  'no-opcua': z.boolean().default(false),
  batch: z.boolean().default(false),
  'data-dir': z.string().min(1).default('.data'),
  'catch-up-h': z.coerce.number().positive().max(720).optional(),
  'resume-from': z.iso.datetime({ offset: true }).optional(),
  'history-days': z.coerce.number().positive().max(400).optional(),
  'history-out': z.string().min(1).optional(),
  'history-end': z.iso.datetime({ offset: true }).optional(),
  'history-step-s': z.coerce.number().int().min(1).max(3600).optional(),
});

async function main(): Promise<number> {
  const { values } = parseArgs({
    options: {
      scenario: { type: 'string', default: 'demo' },
      speed: { type: 'string' },
      seed: { type: 'string' },
      'mqtt-url': { type: 'string' },
      'no-mqtt': { type: 'boolean' },
      'mqtt-username': { type: 'string' },
      'mqtt-password-file': { type: 'string' },
      'opcua-port': { type: 'string' },
      'no-opcua': { type: 'boolean' },
      batch: { type: 'boolean' },
      'data-dir': { type: 'string' },
      'catch-up-h': { type: 'string' },
      'resume-from': { type: 'string' },
      'history-days': { type: 'string' },
      'history-out': { type: 'string' },
      'history-end': { type: 'string' },
      'history-step-s': { type: 'string' },
      list: { type: 'boolean' },
      help: { type: 'boolean', short: 'h' },
    },
    strict: true,
  });
  if (values.help) {
    console.log('usage: npm run sim -- --scenario <name> [--speed 1..3600] [--seed N] [--mqtt-url URL|--no-mqtt] [--mqtt-username U --mqtt-password-file F] [--opcua-port P|--no-opcua] [--batch] [--data-dir D] [--catch-up-h H | --resume-from ISO] [--list]\n       npm run sim -- --scenario <name> --history-days D --history-out FILE [--history-end ISO] [--history-step-s S]');
    return 0;
  }
  if (values.list) {
    console.log(listScenarios().join('\n'));
    return 0;
  }
  const parsed = argsSchema.safeParse(values);
  if (!parsed.success) {
    for (const i of parsed.error.issues) console.error(`--${i.path.join('.')}: ${i.message}`);
    return 2;
  }
  const a = parsed.data;
  if (a['history-days'] !== undefined || a['history-out'] !== undefined) {
    if (a['history-days'] === undefined || a['history-out'] === undefined) {
      console.error('--history-days and --history-out go together');
      return 2;
    }
    const r = await exportHistory({
      scenario: a.scenario,
      seed: a.seed,
      days: a['history-days'],
      out: a['history-out'],
      ...(a['history-end'] ? { end: new Date(a['history-end']) } : {}),
      ...(a['history-step-s'] ? { step_s: a['history-step-s'] } : {}),
    });
    console.log(`history: ${r.rows} samples from ${r.from.toISOString()} to ${r.to.toISOString()} written to ${a['history-out']}`);
    return 0;
  }
  if (a['catch-up-h'] !== undefined && a['resume-from'] !== undefined) {
    console.error('--catch-up-h and --resume-from exclude each other');
    return 2;
  }
  if (a['mqtt-password-file'] && !a['mqtt-username']) {
    console.error('--mqtt-password-file needs --mqtt-username');
    return 2;
  }
  let mqttPassword: string | undefined;
  if (a['mqtt-password-file']) {
    try {
      mqttPassword = fs.readFileSync(a['mqtt-password-file'], 'utf8').trim();
    } catch (e) {
      console.error(`--mqtt-password-file: cannot read ${a['mqtt-password-file']}: ${(e as Error).message}`);
      return 2;
    }
  }
  const sim = await startSimulator({
    scenario: a.scenario,
    ...(a.speed !== undefined ? { speed: a.speed } : {}),
    seed: a.seed,
    mqttUrl: a['no-mqtt'] ? null : a['mqtt-url'],
    ...(a['mqtt-username'] ? { mqttUsername: a['mqtt-username'], ...(mqttPassword !== undefined ? { mqttPassword } : {}) } : {}),
    opcuaPort: a['no-opcua'] ? null : a['opcua-port'],
    batch: a.batch,
    dataDir: a['data-dir'],
    ...(a['catch-up-h'] !== undefined ? { catchUp_h: a['catch-up-h'] } : {}),
    ...(a['resume-from'] !== undefined ? { resumeFrom: new Date(a['resume-from']) } : {}),
    log: (line) => console.log(line),
  });
  await new Promise<void>((resolve) => {
    process.once('SIGINT', resolve);
    process.once('SIGTERM', resolve);
  });
  await sim.stop();
  return 0;
}

main().then(
  (code) => process.exit(code),
  (e: unknown) => {
    console.error(e instanceof ScenarioError ? e.message : `simulator failed: ${(e as Error).stack ?? String(e)}`);
    process.exit(1);
  },
);
