/**
 * Ingest scale-out benchmark: `npm run bench:ingest -- --workers 2 --broker mosquitto`
 * (tests/bench/ingest.bench.ts hands over here when `--workers` is given). A throwaway
 * PostgreSQL cluster of its own and Debian's mosquitto (MQTT 5) as the broker; the MQTT source
 * is shared by the ingest workers as one shared subscription (`$share/flocstream/b/#`, MQTT 5.0
 * §4.8.2). Each round starts a fresh mosquitto (no session of an earlier round left in the
 * group) and 1 or N worker processes, publishes `--samples` single-value QoS 1 messages on 1000
 * topics from a process of its own (tests/bench/mqtt-load.ts, every packet encoded before the
 * clock starts) and measures publish start → the last sample committed. Rounds alternate
 * 1 worker / N workers so drift in the machine's load falls on both; the figures are medians.
 * Every round checks zero loss (exactly the samples sent are stored). Writes
 * `.data/bench/ingest-scale.json` and prints the ratio N workers ÷ 1 worker.
 *
 * On a 2-core machine no speed-up is to be expected: PostgreSQL, the broker, the publisher and
 * the workers share the two cores; the ratio is the cost of the coordination (target ≥ 0.85).
 */
import { spawn } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import pg from 'pg';
import { startLocalPostgres } from '../../server/db/local-postgres.ts';
import { runMigrations } from '../../server/db/migrate.ts';
import { spawnIngestWorker, type IngestWorkerProcess } from '../helpers/ingest-worker.ts';
import { startMosquitto } from '../helpers/mosquitto.ts';
import { freePort } from '../helpers/net.ts';
import { waitFor } from '../helpers/wait.ts';

const ROOT = path.resolve(import.meta.dirname, '../..');
const TAGS = 1_000;

const argv = process.argv.slice(2);
const arg = (name: string, def: string) => {
  const i = argv.indexOf(name);
  return i >= 0 ? argv[i + 1]! : def;
};
const WORKERS = Number(arg('--workers', '2'));
const BROKER = arg('--broker', 'mosquitto');
const ROUNDS = Number(arg('--rounds', '3'));
const N = Number(arg('--samples', '200000'));
if (!Number.isInteger(WORKERS) || WORKERS < 2 || WORKERS > 8) throw new Error('--workers takes a whole number from 2 to 8');
if (BROKER !== 'mosquitto') throw new Error('--broker: only mosquitto (an MQTT 5 broker with shared subscriptions) is supported; the embedded broker speaks MQTT 3.1.1, where one worker holds the source');
if (!Number.isInteger(ROUNDS) || ROUNDS < 1 || ROUNDS > 5) throw new Error('--rounds takes a whole number from 1 to 5');
if (!Number.isInteger(N) || N < TAGS || N % TAGS) throw new Error(`--samples takes a multiple of ${TAGS}`);

/** CPU seconds (user + system) of a process so far, from /proc/<pid>/stat (proc(5)). */
function cpuOf(pid: number | undefined): number {
  try {
    const rest = fs.readFileSync(`/proc/${pid}/stat`, 'utf8').split(') ')[1]!.split(' ');
    return (Number(rest[11]) + Number(rest[12])) / 100;
  } catch {
    return 0;
  }
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s.length % 2 ? s[(s.length - 1) / 2]! : (s[s.length / 2 - 1]! + s[s.length / 2]!) / 2;
}

const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-bench-scale-'));
const cleanup: (() => Promise<void> | void)[] = [];
const notes: string[] = [];
const rates: Record<number, number[]> = { 1: [], [WORKERS]: [] };
const loadBefore = os.loadavg();
try {
  const cluster = await startLocalPostgres({ dataDir: tmp, port: await freePort(), dbName: 'bench' });
  cleanup.push(() => cluster.stop());
  await runMigrations(cluster.url);
  const pool = new pg.Pool({ connectionString: cluster.url, max: 2 });
  cleanup.push(() => pool.end());
  const plant = (await pool.query(`INSERT INTO plants (code, name) VALUES ('bench', 'Bench') RETURNING id`)).rows[0].id;
  const source = (await pool.query(`INSERT INTO sources (plant_id, name, kind, url, options) VALUES ($1, 'bench', 'mqtt', 'mqtt://127.0.0.1:1', '{"topics":["b/#"],"protocolVersion":5}') RETURNING id`, [plant])).rows[0].id;
  await pool.query(`INSERT INTO tags (plant_id, source_id, name, address, unit) SELECT $1, $2, 'T' || i, 'b/tag' || i, 'g/L' FROM generate_series(0, $3 - 1) i`, [plant, source, TAGS]);

  const order = Array.from({ length: ROUNDS }, () => [1, WORKERS]).flat();
  for (const [round, w] of order.entries()) {
    const broker = await startMosquitto(path.join(tmp, `broker-${round}`));
    await pool.query(`UPDATE sources SET url = $1 WHERE id = $2`, [broker.url, source]);
    // Sessions of the last round's workers went with the last broker.
    await pool.query(`DELETE FROM source_leases`);
    const workers: IngestWorkerProcess[] = [];
    for (let i = 0; i < w; i++) workers.push(spawnIngestWorker({ DATABASE_URL: cluster.url, FLOCSTREAM_DATA_DIR: path.join(tmp, `r${round}-w${i}`), LOG_LEVEL: 'warn', INGEST_MQTT_CLIENT_ID: `bench-r${round}` }));
    const connected = async () =>
      (await pool.query(`SELECT count(*)::int AS n FROM ingest_workers WHERE pid = ANY($1) AND status->'sources'->0->>'state' = 'connected'`, [workers.map((x) => x.pid)])).rows[0].n as number;
    await waitFor(connected, (n) => n === w, { what: `${w} workers connected`, timeout_ms: 120_000, every_ms: 200 });

    // Each round writes a window of its own (20 s of sample time, 100 ms apart per tag).
    const from = Date.now() - 6 * 3_600_000 + round * 60_000;
    const stored = async () => Number((await pool.query(`SELECT count(*) AS n FROM samples WHERE ts >= $1 AND ts < $2`, [new Date(from), new Date(from + 60_000)])).rows[0].n);
    const cpu0 = { workers: workers.map((x) => cpuOf(x.pid)), broker: cpuOf(broker.proc.pid) };
    const pub = spawn(process.execPath, ['--import', 'tsx', 'tests/bench/mqtt-load.ts', 'publish', broker.url, 'single', String(N), '1', String(from)], { cwd: ROOT, stdio: ['ignore', 'pipe', 'inherit'] });
    let out = '';
    pub.stdout.on('data', (d: Buffer) => (out += d.toString()));
    const start = await waitFor(() => (/\{"start":([\d.]+)\}/.exec(out)?.[1] ?? null), undefined, { what: 'the publisher starting', timeout_ms: 60_000, every_ms: 10 });
    await waitFor(stored, (n) => n >= N, { what: `${N} samples stored`, timeout_ms: 600_000, every_ms: 50 });
    const sec = (performance.timeOrigin + performance.now() - Number(start)) / 1000;
    const n = await stored();
    if (n !== N) throw new Error(`round ${round}: ${n} samples stored of ${N} sent`);
    const shares = await pool.query<{ m: string }>(`SELECT (SELECT sum((s->>'messages')::bigint) FROM jsonb_array_elements(status->'sources') s) AS m FROM ingest_workers WHERE pid = ANY($1) ORDER BY pid`, [workers.map((x) => x.pid)]);
    const cpuW = workers.map((x, i) => Math.round((cpuOf(x.pid) - cpu0.workers[i]!) * 10) / 10);
    const rate = Math.round(N / sec);
    rates[w]!.push(rate);
    notes.push(
      `round ${round + 1}, ${w} worker${w > 1 ? 's' : ''}: ${N} samples in ${sec.toFixed(1)} s = ${rate}/s, all stored once; messages per worker ${shares.rows.map((r) => r.m).join(' / ')}; CPU s — workers ${cpuW.join(' + ')}, mosquitto ${(cpuOf(broker.proc.pid) - cpu0.broker).toFixed(1)}`,
    );
    console.log(notes.at(-1));
    for (const x of workers) await x.stop();
    await broker.stop();
  }
} finally {
  for (const c of cleanup.reverse()) await c();
}

const one = median(rates[1]!);
const many = median(rates[WORKERS]!);
const ratio = Math.round((many / one) * 100) / 100;
const result = {
  measuredAt: new Date().toISOString(),
  cpus: os.cpus().length,
  broker: 'mosquitto (Debian), MQTT 5 shared subscription',
  samplesPerRound: N,
  rounds: ROUNDS,
  workers: WORKERS,
  oneWorkerSamplesPerSec: one,
  [`workers${WORKERS}SamplesPerSec`]: many,
  ratio,
  target: '≥ 0.85 (on 2 cores the cost of coordination, not a speed-up)',
  lost: 0,
  loadAverage: { before: loadBefore.map((x) => Math.round(x * 100) / 100), after: os.loadavg().map((x) => Math.round(x * 100) / 100) },
  notes,
};
console.log(`\nFlocstream ingest scale-out — ${os.cpus().length} CPUs, load average ${result.loadAverage.before.join(' ')} → ${result.loadAverage.after.join(' ')}`);
console.log(`1 worker:  ${one.toLocaleString('en-US')} samples/s (median of ${ROUNDS})`);
console.log(`${WORKERS} workers: ${many.toLocaleString('en-US')} samples/s (median of ${ROUNDS})`);
console.log(`ratio ${WORKERS} ÷ 1 = ${ratio} (target ≥ 0.85), zero loss in every round`);
const file = path.join(ROOT, '.data', 'bench', 'ingest-scale.json');
fs.mkdirSync(path.dirname(file), { recursive: true });
fs.writeFileSync(file, JSON.stringify(result, null, 2));
console.log(`written ${path.relative(ROOT, file)}`);
process.exit(0);
