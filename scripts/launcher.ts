/**
 * The pieces `npm start` and `npm run dev` share: one stop list run in reverse on Ctrl-C, the
 * embedded broker, the API with the demo plant seeded, the simulator, ingest and the banner.
 * start.ts runs the API in its own process; dev.ts runs the same API under `tsx watch`
 * (scripts/api.ts) so it restarts when its sources change.
 */
import { spawn } from 'node:child_process';
import { once } from 'node:events';
import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { INGEST_NODE_ARGS } from '../ingest/config.ts';
import { repositories, type AppContext } from '../server/app-context.ts';
import { ensureBrokerCredentials, INGEST_USER, SIMULATOR_USER, simulatorPasswordFile } from '../server/broker/broker-users.ts';
import { BROKER_NODE_ARGS, BROKER_READY } from '../server/broker/process.ts';
import type { Config } from '../server/config.ts';
import { demoCredentials, startServer, type RunningServer } from '../server/main.ts';
import { services } from '../server/app-context.ts';
import { toAlarmOut } from '../server/services/alarm.service.ts';
import { labRow } from '../server/services/lab.service.ts';
import { historyImportQuery } from '../shared/contracts/history.ts';
import { DEMO_SOURCE_NAMES, kestrelBendConfig, kestrelBendLabEntry } from '../simulators/plant/kestrel-bend.config.ts';
import { DEMO_PLANT } from '../simulators/plant/demo-plant.ts';
import { spawnTs, superviseTs, waitForLine, type Child, type ChildExit, type SupervisedChild } from './children.ts';

export const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');

/** The line scripts/api.ts prints once the API listens; dev.ts waits for it after every reload. */
export const API_READY = /^API listening at (http:\/\/\S+)/;

export interface Launcher {
  say(m: string): void;
  /** True once a stop began: a child exiting then is expected. */
  readonly stopping: boolean;
  /** Registers a stop step; steps run in reverse order of registration. */
  onStop(step: () => Promise<void> | void): void;
  stop(why: string, code?: number): Promise<void>;
  /** Spawns a TypeScript child whose unexpected exit stops everything. */
  child(name: string, entry: string, args: string[], env?: Record<string, string>, nodeArgs?: readonly string[]): Child;
  /** Spawns a TypeScript child that is restarted with backoff when it exits (children.ts superviseTs); only a stop ends it. */
  supervised(name: string, entry: string, args: string[], env?: Record<string, string>, nodeArgs?: readonly string[]): SupervisedChild;
  /** Called whenever a supervised child exited and a restart is scheduled (besides the line printed). */
  onChildExit(handler: (e: ChildExit) => Promise<void> | void): void;
}

/**
 * Runs `main` with a launcher whose stop list runs on SIGINT/SIGTERM (a terminal's Ctrl-C reaches
 * the whole process group; the launcher still stops each child and then PostgreSQL itself).
 */
export function runLauncher(tag: string, main: (l: Launcher) => Promise<void>): void {
  const say = (m: string) => console.log(`[${tag}] ${m}`);
  const steps: Array<() => Promise<void> | void> = [];
  const exitHandlers: Array<(e: ChildExit) => Promise<void> | void> = [];
  const supervisedChildren: SupervisedChild[] = [];
  let stopping = false;
  const l: Launcher = {
    say,
    get stopping() {
      return stopping;
    },
    onStop: (step) => void steps.push(step),
    async stop(why, code = 0) {
      if (stopping) return;
      stopping = true;
      say(`${why}: stopping…`);
      // A terminal's Ctrl-C reaches the children as well: each exit from now on is the stop, not a
      // crash to restart, print and alarm, though the child's own stop step comes later in the list.
      for (const c of supervisedChildren) c.halt();
      for (const s of steps.reverse()) {
        try {
          await s();
        } catch (err) {
          console.error(`[${tag}] while stopping: ${(err as Error).message}`);
        }
      }
      say('stopped; PostgreSQL is down and no process is left behind');
      process.exit(code);
    },
    child(name, entry, args, env = {}, nodeArgs = []) {
      const c = spawnTs(
        root,
        name,
        entry,
        args,
        env,
        (code) => {
          if (!stopping) void l.stop(`${name} exited (code ${code})`, 1);
        },
        nodeArgs,
      );
      steps.push(() => c.stop());
      return c;
    },
    supervised(name, entry, args, env = {}, nodeArgs = []) {
      const c = superviseTs(
        root,
        name,
        entry,
        args,
        env,
        (e) => {
          const how = e.signal ? `signal ${e.signal}` : `code ${e.code}`;
          console.error(`[${tag}] ${name} exited (${how}) after ${Math.round(e.ran_ms / 1000)} s; restarting in ${e.restartIn_ms / 1000} s (restart ${e.restarts})`);
          for (const h of exitHandlers) {
            void Promise.resolve()
              .then(() => h(e))
              .catch((err: unknown) => console.error(`[${tag}] could not record ${name}'s exit: ${(err as Error).message}`));
          }
        },
        nodeArgs,
      );
      supervisedChildren.push(c);
      steps.push(() => c.stop());
      return c;
    },
    onChildExit: (h) => void exitHandlers.push(h),
  };
  process.on('SIGINT', () => void l.stop('SIGINT'));
  process.on('SIGTERM', () => void l.stop('SIGTERM'));
  main(l).catch(async (err: unknown) => {
    console.error(`[${tag}] cannot start: ${(err as Error).message}`);
    await l.stop('start-up failed', 1);
  });
}

/**
 * The embedded MQTT broker in its own process, unless MQTT_URL names an external one; resolves
 * with the broker URL. Its two users (ingest, simulator) are created in `<dataDir>/broker/` at
 * the first start; the simulator may publish only below the demo plant's topic prefix.
 */
export async function startBroker(l: Launcher, config: Config): Promise<string> {
  if (config.mqttUrl) return config.mqttUrl;
  ensureBrokerCredentials(config.dataDir, [`${DEMO_PLANT.code}/#`]);
  const args = ['127.0.0.1', String(config.mqttPort), '--data-dir', config.dataDir, '--max-packet-bytes', String(config.mqttMaxPacketBytes)];
  const broker = l.supervised('broker', 'server/broker/main.ts', args, {}, BROKER_NODE_ARGS);
  return (await waitForLine(broker.proc, broker.name, BROKER_READY))[1]!;
}

/**
 * The alarm a child's exit raises, on every plant (a process serves them all): `ingest-down`
 * (priority 1: the monitor is blind while ingest or the broker is away) with the process as
 * target, announced on the live stream as the balance engine announces its alarms. The engine
 * clears it at its next evaluation (the process is back: ISA-18.2's "returned to normal,
 * unacknowledged"), so it stays in the alarm list until an operator acknowledges it.
 */
export async function raiseProcessAlarm(ctx: AppContext, e: ChildExit): Promise<void> {
  const repos = repositories(ctx);
  const how = e.signal ? `was killed by ${e.signal}` : `exited with code ${e.code}`;
  const message = `The ${e.name} process ${how} after ${Math.round(e.ran_ms / 1000)} s and is restarted in ${e.restartIn_ms / 1000} s (restart ${e.restarts} since start); data may be delayed meanwhile.`;
  for (const { id } of await repos.plants.list(null)) {
    // The repository raises at most one open alarm per rule and target: a crash loop is one alarm.
    const row = await repos.alarms.raise({ plantId: id, rule: 'ingest-down', target: `process:${e.name}`, priority: 1, message, value: null, limit: null, raisedAt: new Date() });
    if (row) await repos.stream.notify(id, 'alarm', { change: 'raised', alarm: toAlarmOut(row) });
  }
}

function opcuaUrl(config: Config): string {
  return `opc.tcp://127.0.0.1:${config.simOpcuaPort}/flocstream-sim`;
}

/**
 * The API (startServer: private PostgreSQL unless DATABASE_URL is set, migrations, users, balance
 * engine, HTTP) and, in demo mode, the demo plant seeded with the simulator's endpoints.
 */
export async function startApi(config: Config, mqttUrl: string, say: (m: string) => void): Promise<RunningServer> {
  const server = await startServer(config, { say });
  if (!config.demo) return server;
  try {
    // The demo plant's configuration document goes through the service behind POST
    // /api/v1/plants; an existing plant with its code is left as it is, only its two demo
    // sources follow this run's ports.
    const ep = { mqttUrl, opcuaUrl: opcuaUrl(config) };
    const { plantConfig } = services(server.ctx);
    const repos = repositories(server.ctx);
    const seeded = await plantConfig.ensure(null, kestrelBendConfig(ep));
    if (!seeded.created) await plantConfig.setSourceUrls(null, seeded.plantId, { [DEMO_SOURCE_NAMES.mqtt]: ep.mqttUrl, [DEMO_SOURCE_NAMES.opcua]: ep.opcuaUrl });
    if (!config.mqttUrl) {
      // The embedded broker admits only its users: ingest reads its password from the demo
      // plant's MQTT source, as it would an external broker's.
      const creds = ensureBrokerCredentials(config.dataDir, [`${DEMO_PLANT.code}/#`]);
      const source = await repos.wiring.sourceByName(seeded.plantId, DEMO_SOURCE_NAMES.mqtt);
      if (!source) throw new Error(`the demo plant has no source "${DEMO_SOURCE_NAMES.mqtt}"`);
      await repos.wiring.updateSource(source.id, { username: INGEST_USER, secret: creds.ingest.password });
    }
    say(`${seeded.created ? 'seeded' : 'found'} the demo plant "${DEMO_PLANT.name}" (invented; plant id ${seeded.plantId})`);
    if (seeded.created) {
      // The demo's settleability test (DSVI 120 mL/g), so the RAS limit has an SVI to work from.
      await repos.lab.insertAll([labRow(seeded.plantId, null, kestrelBendLabEntry(Date.now()))]);
    }
    return server;
  } catch (err) {
    await server.close();
    throw err;
  }
}

/** Days of simulated past the demo loads at its first start (longer than any window a figure reads). */

/** The demo's simulated past as a CSV file being written (prepareDemoHistory). */
export interface DemoHistoryFile {
  file: string;
  written: Promise<void>;
}

/**
 * At a first start (no PostgreSQL cluster in the data folder yet), starts the simulator writing
 * FLOCSTREAM_DEMO_HISTORY_DAYS (35) days of Kestrel Bend as a historian CSV (the model run fast, dry weather, one-minute values;
 * nothing over MQTT) while the cluster is created and migrated; null otherwise.
 */
export function prepareDemoHistory(config: Config): DemoHistoryFile | null {
  if (!config.demo || config.demoHistoryDays === 0 || config.databaseUrl || fs.existsSync(path.join(config.dataDir, 'pg'))) return null;
  const file = path.join(config.dataDir, 'imports', 'demo-history.csv');
  fs.mkdirSync(path.dirname(file), { recursive: true });
  const args = ['--import', 'tsx', 'simulators/cli.ts', '--scenario', 'dry-weather', '--history-days', String(config.demoHistoryDays), '--history-end', new Date().toISOString(), '--history-out', file];
  const sim = spawn(process.execPath, args, { cwd: root, stdio: ['ignore', 'ignore', 'pipe'] });
  let stderr = '';
  sim.stderr!.on('data', (b: Buffer) => (stderr += b.toString()));
  const written = once(sim, 'exit').then(([code]) => {
    if (code !== 0) throw new Error(`demo history: the simulator failed (code ${code}): ${stderr}`);
  });
  written.catch(() => {});
  return { file, written };
}

/**
 * The demo's past, before it goes live. When the demo plant has no stored sample yet, the file
 * of prepareDemoHistory goes through the historian import service like any upload and is waited
 * for (rows stored, rollups built; the balance recompute of the window goes on in the
 * background). Every start then resumes the simulation after the newest stored sample, read from
 * the database, so no start writes into a window that holds data. Returns that time, or
 * undefined outside demo mode.
 */
export async function loadDemoHistory(config: Config, server: RunningServer, say: (m: string) => void, prepared: DemoHistoryFile | null): Promise<Date | undefined> {
  if (!config.demo) return undefined;
  const repos = repositories(server.ctx);
  const plant = await repos.plants.byCode(DEMO_PLANT.code);
  if (!plant) return undefined;
  const history = repos.history;
  const last = await history.lastSampleTime(plant.id);
  if (last || !prepared) {
    if (last) say(`resuming the simulation after the last stored sample (${last.toISOString()})`);
    return last ?? undefined;
  }
  const t0 = Date.now();
  say(`first start: loading ${config.demoHistoryDays} days of simulated history…`);
  await prepared.written;
  const user = await repos.users.firstActive('integrator');
  if (!user) throw new Error('demo history: no integrator user to import as');
  const principal = { userId: user.id, email: user.email, role: 'integrator' as const, tokenId: null, plantIds: null, ip: null };
  // Hourly balances over the 35 days (840), not one per engine interval: enough for the trends,
  // and the live engine takes over at its own interval.
  const q = historyImportQuery.parse({ balanceStep_s: '3600' });
  const { jobId } = await services(server.ctx).historyImport.start(principal, plant.id, q, fs.createReadStream(prepared.file), { contentType: 'text/csv', fileName: 'demo-history.csv' });
  fs.rmSync(prepared.file, { force: true });
  for (;;) {
    const j = await history.job(jobId);
    if (!j) throw new Error(`demo history: job ${jobId} vanished`);
    if (j.state === 'failed') throw new Error(`demo history: import failed: ${JSON.stringify(j.result)} ${JSON.stringify(j.errors.slice(0, 5))}`);
    if (j.state === 'done') {
      say(`loaded ${j.rows} samples of simulated history in ${((Date.now() - t0) / 1000).toFixed(1)} s (the balances of the past are recomputed in the background)`);
      return (await history.lastSampleTime(plant.id)) ?? undefined;
    }
    await new Promise((r) => setTimeout(r, 250));
  }
}

/**
 * In demo mode, the simulator of Kestrel Bend publishing to `mqttUrl` and serving OPC UA:
 * after `resumeFrom` (loadDemoHistory) caught up fast to the wall clock, or, without it, two
 * simulated hours replayed fast; then real time, so no timestamp is in the future.
 */
export function startSimulator(l: Launcher, config: Config, mqttUrl: string, resumeFrom?: Date): void {
  if (!config.demo) return;
  const args = ['--scenario', config.simScenario, '--mqtt-url', mqttUrl, '--opcua-port', String(config.simOpcuaPort), '--data-dir', config.dataDir];
  args.push(...(resumeFrom ? ['--resume-from', resumeFrom.toISOString()] : ['--catch-up-h', '2']));
  if (config.simSpeed) args.push('--speed', String(config.simSpeed));
  if (!config.mqttUrl) args.push('--mqtt-username', SIMULATOR_USER, '--mqtt-password-file', simulatorPasswordFile(config.dataDir));
  l.supervised('simulator', 'simulators/cli.ts', args);
}

/**
 * `config.ingestWorkers` ingest processes writing to `databaseUrl` (INGEST_WORKERS, default 1),
 * each supervised. The first keeps the data folder itself (spool, log, PKI as before); each
 * further one gets a folder of its own (claimWorkerDir), because a spool belongs to one worker.
 */
export function startIngest(l: Launcher, config: Config, databaseUrl: string): void {
  for (let i = 1; i <= config.ingestWorkers; i++) {
    const dir = i === 1 ? config.dataDir : claimWorkerDir(config.dataDir);
    l.supervised(i === 1 ? 'ingest' : `ingest-${i}`, 'ingest/main.ts', [], { DATABASE_URL: databaseUrl, FLOCSTREAM_DATA_DIR: dir }, INGEST_NODE_ARGS);
  }
}

/**
 * A data folder for one more ingest worker on this host: the first `<dataDir>/ingest-workers/<n>`
 * whose `launcher.pid` names no running process, claimed by writing this process's pid there.
 * A folder left by a worker that died keeps its spool, which the next worker to claim it replays.
 */
export function claimWorkerDir(dataDir: string): string {
  for (let n = 2; ; n++) {
    const dir = path.join(dataDir, 'ingest-workers', String(n));
    fs.mkdirSync(dir, { recursive: true, mode: 0o700 });
    const pidFile = path.join(dir, 'launcher.pid');
    const pid = Number(fs.existsSync(pidFile) ? fs.readFileSync(pidFile, 'utf8') : NaN);
    if (Number.isInteger(pid) && pid > 0 && processAlive(pid)) continue;
    fs.writeFileSync(pidFile, String(process.pid), { mode: 0o600 });
    return dir;
  }
}

function processAlive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (err) {
    return (err as NodeJS.ErrnoException).code === 'EPERM';
  }
}

/** The first admin's password, shown once when it was just created. */
export function sayNewAdmin(say: (m: string) => void, server: RunningServer): void {
  for (const c of server.credentials.filter((c) => !c.email.startsWith('demo-'))) {
    say(`first admin: ${c.email}  password: ${c.password}  (shown once)`);
  }
}

/** The demo users and the advisory notice; its last line is what a person (and a test) waits for. */
export function sayReady(l: Launcher, config: Config): void {
  if (config.demo) {
    l.say('demo users (random passwords, kept in .data/demo-credentials.json):');
    for (const c of demoCredentials(config.dataDir)) l.say(`  ${c.role.padEnd(10)} ${c.email}  ${c.password}`);
  }
  l.say('advisory only: Flocstream never writes to the control system. Press Ctrl-C to stop.');
}
