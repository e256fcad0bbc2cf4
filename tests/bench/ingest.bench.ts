/**
 * Ingest benchmark (`npm run bench:ingest`): a throwaway PostgreSQL cluster of its own, the
 * embedded broker, ingest as a child process — all on 127.0.0.1. Prints a table and writes
 * `.data/bench/ingest.json`. Every figure is measured in this run.
 *
 * (a) writer: SampleStore (binary COPY into `samples` with its primary key, plus the rollup_1m,
 *     rollup_1h and tag_latest upserts) against `psql \copy` of the same rows into an identical
 *     partitioned table with the same primary key;
 * (b) MQTT → PostgreSQL end to end, single-value and batched messages, QoS 1;
 * (c) publish → row visible latency at 10 000 samples/s;
 * (d) peak RSS (VmHWM) of the ingest process.
 */
import { spawn, spawnSync } from 'node:child_process';
import fs from 'node:fs';
import net from 'node:net';
import os from 'node:os';
import path from 'node:path';
import mqtt, { type MqttClient } from 'mqtt';
import pg from 'pg';
import { startEmbeddedBroker } from '../../server/broker/embedded-broker.ts';
import { localPsql, startLocalPostgres } from '../../server/db/local-postgres.ts';
import { runMigrations } from '../../server/db/migrate.ts';
import { DEFAULT_BATCH_ROWS } from '../../ingest/config.ts';
import { SampleStore } from '../../ingest/sink/sample-store.ts';
import type { Sample } from '../../ingest/pipeline/types.ts';

const ROOT = path.resolve(import.meta.dirname, '../..');
const DAY = 86_400_000;
const TAGS = 1_000;

function freePort(): Promise<number> {
  return new Promise((resolve) => {
    const s = net.createServer();
    s.listen(0, '127.0.0.1', () => {
      const a = s.address() as net.AddressInfo;
      s.close(() => resolve(a.port));
    });
  });
}

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));
const isRoot = process.getuid?.() === 0;

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s.length % 2 ? s[(s.length - 1) / 2]! : (s[s.length / 2 - 1]! + s[s.length / 2]!) / 2;
}

function pct(sorted: number[], p: number): number {
  return sorted[Math.min(sorted.length - 1, Math.floor((p / 100) * sorted.length))] ?? NaN;
}

async function count(pool: pg.Pool, sql: string, params: unknown[]): Promise<number> {
  return Number((await pool.query(sql, params)).rows[0].n);
}

async function waitCount(pool: pg.Pool, sql: string, params: unknown[], n: number, timeoutMs: number): Promise<number> {
  const end = Date.now() + timeoutMs;
  for (;;) {
    const c = await count(pool, sql, params);
    if (c >= n) return Date.now();
    if (Date.now() > end) throw new Error(`only ${c} of ${n} rows after ${timeoutMs} ms`);
    await sleep(20);
  }
}

/** QoS 1 publishing with at most `window` messages awaiting their PUBACK. */
async function publishAll(c: MqttClient, n: number, make: (k: number) => [string, string | Buffer], window = 2_000): Promise<void> {
  let next = 0;
  const worker = async () => {
    while (next < n) {
      const k = next++;
      const [t, p] = make(k);
      await c.publishAsync(t, p, { qos: 1 });
    }
  };
  await Promise.all(Array.from({ length: window }, worker));
}

const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-bench-'));
const results: Record<string, number> = {};
const notes: string[] = [];
let cleanup: (() => void)[] = [];
try {
  const pgPort = await freePort();
  const cluster = await startLocalPostgres({ dataDir: tmp, port: pgPort, dbName: 'bench' });
  cleanup.push(() => cluster.stop());
  await runMigrations(cluster.url);
  const pool = new pg.Pool({ connectionString: cluster.url, max: 3 });
  cleanup.push(() => void pool.end());
  const mqttPort = await freePort();
  const broker = await startEmbeddedBroker({ port: mqttPort });
  cleanup.push(() => void broker.close());

  const plant = (await pool.query(`INSERT INTO plants (code, name) VALUES ('bench', 'Bench') RETURNING id`)).rows[0].id;
  const source = (await pool.query(`INSERT INTO sources (plant_id, name, kind, url, options) VALUES ($1, 'bench', 'mqtt', $2, '{"topics":["b/#"],"protocolVersion":4}') RETURNING id`, [plant, broker.url])).rows[0].id;
  await pool.query(
    `INSERT INTO tags (plant_id, source_id, name, address, unit) SELECT $1, $2, 'T' || i, 'b/tag' || i, 'g/L' FROM generate_series(0, $3 - 1) i`,
    [plant, source, TAGS],
  );
  const tagIds: number[] = (await pool.query(`SELECT id FROM tags ORDER BY id`)).rows.map((r) => r.id);

  // ---- (a) writer vs psql \copy ------------------------------------------------------------
  // Three rounds, alternating writer and psql, each round on day partitions of its own (fresh
  // indexes for both); the figures are the medians, so a checkpoint or a neighbour's burst in one
  // round does not decide the ratio. The writer uses the ingest default batch size.
  const ROWS = 1_000_000;
  const ROUNDS = 3;
  const ps = localPsql(tmp)!;
  fs.chmodSync(tmp, 0o755);
  await pool.query(`CREATE TABLE samples_ref (LIKE samples INCLUDING ALL) PARTITION BY RANGE (ts)`);
  await pool.query(`CREATE TABLE samples_ref_default PARTITION OF samples_ref DEFAULT`);
  const writerRates: number[] = [];
  const psqlRates: number[] = [];
  let dayA = Math.floor(Date.now() / DAY) * DAY - 2 * DAY;
  for (let round = 0; round < ROUNDS; round++, dayA -= DAY) {
    const rows: Sample[] = [];
    for (let i = 0; i < ROWS / TAGS; i++) for (const id of tagIds) rows.push({ tagId: id, ts: dayA + i * 1000, value: Math.sin(i / 10) * 3 + 3, quality: 0 });
    await pool.query(`SELECT flocstream_ensure_day_partition($1)`, [new Date(dayA)]);
    // DDL takes no bind parameters; the bounds are our own ISO strings.
    await pool.query(`CREATE TABLE samples_ref_${round} PARTITION OF samples_ref FOR VALUES FROM ('${new Date(dayA).toISOString()}') TO ('${new Date(dayA + DAY).toISOString()}')`);
    const store = new SampleStore(cluster.url, { retentionDays: 400 });
    let t = performance.now();
    for (let i = 0; i < rows.length; i += DEFAULT_BATCH_ROWS) await store.write(rows.slice(i, i + DEFAULT_BATCH_ROWS), []);
    writerRates.push(ROWS / ((performance.now() - t) / 1000));
    await store.close();

    const csv = path.join(tmp, 'rows.tsv');
    fs.writeFileSync(csv, rows.map((r) => `${r.tagId}\t${new Date(r.ts).toISOString()}\t${r.value}\t${r.quality}`).join('\n') + '\n');
    fs.chmodSync(csv, 0o644);
    const args = ['-h', ps.sockDir, '-p', String(pgPort), '-U', 'postgres', '-d', 'bench', '-v', 'ON_ERROR_STOP=1', '-c', `\\copy samples_ref (tag_id, ts, value, quality) FROM '${csv}'`];
    t = performance.now();
    const r = isRoot ? spawnSync('runuser', ['-u', 'postgres', '--', ps.psql, ...args], { encoding: 'utf8' }) : spawnSync(ps.psql, args, { encoding: 'utf8' });
    psqlRates.push(ROWS / ((performance.now() - t) / 1000));
    if (r.status !== 0) throw new Error(`psql \\copy failed: ${r.stderr}`);
    if ((await count(pool, `SELECT count(*) n FROM samples_ref_${round}`, [])) !== ROWS) throw new Error('reference copy incomplete');
    if ((await count(pool, `SELECT count(*) n FROM samples WHERE ts >= $1 AND ts < $2`, [new Date(dayA), new Date(dayA + DAY)])) !== ROWS) throw new Error('writer incomplete');
  }
  results.writerRowsPerSec = Math.round(median(writerRates));
  results.psqlCopyRowsPerSec = Math.round(median(psqlRates));
  results.writerRatio = Math.round((results.writerRowsPerSec / results.psqlCopyRowsPerSec) * 100) / 100;
  notes.push(`writer rounds ${writerRates.map((x) => Math.round(x / 1000) + 'k').join(', ')} rows/s; psql rounds ${psqlRates.map((x) => Math.round(x / 1000) + 'k').join(', ')} rows/s; batch ${DEFAULT_BATCH_ROWS} rows`);
  const dayB = dayA - DAY;

  // ---- ingest child process -----------------------------------------------------------------
  const dataDir = path.join(tmp, 'ingest');
  const child = spawn(process.execPath, ['--import', 'tsx', 'ingest/main.ts'], {
    cwd: ROOT,
    env: { ...process.env, DATABASE_URL: cluster.url, FLOCSTREAM_DATA_DIR: dataDir, LOG_LEVEL: 'warn', INGEST_MQTT_CLIENT_ID: 'bench' },
    stdio: ['ignore', 'inherit', 'inherit'],
  });
  cleanup.push(() => child.kill('SIGKILL'));
  const statusFile = path.join(dataDir, 'ingest-status.json');
  for (let i = 0; ; i++) {
    try {
      const st = JSON.parse(fs.readFileSync(statusFile, 'utf8'));
      if (st.sources?.[0]?.state === 'connected') break;
    } catch {
      // not written yet
    }
    if (i > 300) throw new Error('ingest did not connect');
    await sleep(100);
  }
  await sleep(300);
  const pub = await mqtt.connectAsync(broker.url, { clientId: 'bench-pub', protocolVersion: 4 });
  cleanup.push(() => void pub.end(true));
  const inDay = `SELECT count(*) n FROM samples WHERE ts >= $1 AND ts < $2`;

  // ---- (b) end to end, single and batched ------------------------------------------------
  await pool.query(`SELECT flocstream_ensure_day_partition($1)`, [new Date(dayB)]);
  const SINGLE = 150_000;
  let t = performance.now();
  await publishAll(pub, SINGLE, (k) => [`b/tag${k % TAGS}`, `{"v":${k},"ts":"${new Date(dayB + Math.floor(k / TAGS) * 100).toISOString()}"}`]);
  const publishedSingle = performance.now();
  await waitCount(pool, inDay, [new Date(dayB), new Date(dayB + DAY / 2)], SINGLE, 120_000);
  const singleSec = (performance.now() - t) / 1000;
  results.e2eSingleSamplesPerSec = Math.round(SINGLE / singleSec);
  notes.push(`single: publisher alone took ${((publishedSingle - t) / 1000).toFixed(1)} s for ${SINGLE} QoS 1 messages`);

  const BATCHED = 1_000_000;
  const PER = 1_000;
  const base = dayB + DAY / 2;
  const payloads: Buffer[] = [];
  for (let m = 0; m < BATCHED / PER; m++) {
    const samples = [];
    for (let j = 0; j < PER; j++) {
      const k = m * PER + j;
      samples.push({ topic: `b/tag${k % TAGS}`, v: k, ts: new Date(base + Math.floor(k / TAGS) * 10).toISOString() });
    }
    payloads.push(Buffer.from(JSON.stringify({ samples })));
  }
  t = performance.now();
  await publishAll(pub, payloads.length, (m) => ['b/batch', payloads[m]!], 50);
  await waitCount(pool, inDay, [new Date(base), new Date(dayB + DAY)], BATCHED, 120_000);
  results.e2eBatchedSamplesPerSec = Math.round(BATCHED / ((performance.now() - t) / 1000));
  payloads.length = 0;

  // ---- (c) latency at 10 000 samples/s -------------------------------------------------------
  const RATE = 10_000;
  const SECONDS = 10;
  const total = RATE * SECONDS;
  const sentAt = new Float64Array(total);
  const seenAt = new Float64Array(total);
  const t0 = Date.now();
  let polling = true;
  let lowest = 0;
  const poller = (async () => {
    const c = await pool.connect();
    try {
      while (polling || lowest < total) {
        const res = await c.query(`SELECT value FROM samples WHERE ts >= $1 AND value >= $2 AND tag_id = ANY($3)`, [new Date(t0 - 1000), lowest, tagIds]);
        const now = performance.now();
        for (const row of res.rows) {
          const k = row.value as number;
          if (k < total && seenAt[k] === 0) seenAt[k] = now;
        }
        while (lowest < total && seenAt[lowest] !== 0) lowest++;
        if (!polling && performance.now() - sentAt[total - 1]! > 10_000) break;
        await sleep(10);
      }
    } finally {
      c.release();
    }
  })();
  const tickMs = 10;
  const perTick = (RATE * tickMs) / 1000;
  const start = performance.now();
  for (let k = 0; k < total; ) {
    const due = start + (k / perTick) * tickMs;
    const wait = due - performance.now();
    if (wait > 0) await sleep(wait);
    const ps2: Promise<unknown>[] = [];
    for (let j = 0; j < perTick && k < total; j++, k++) {
      sentAt[k] = performance.now();
      ps2.push(pub.publishAsync(`b/tag${k % TAGS}`, `{"v":${k},"ts":"${new Date(t0 + Math.floor(k / TAGS) * 100).toISOString()}"}`, { qos: 1 }));
    }
    void Promise.all(ps2);
  }
  polling = false;
  await poller;
  const lat: number[] = [];
  for (let k = 0; k < total; k++) if (seenAt[k]! > 0) lat.push(seenAt[k]! - sentAt[k]!);
  lat.sort((a, b) => a - b);
  if (lat.length !== total) notes.push(`latency: ${total - lat.length} of ${total} samples not seen within 10 s after the last publish`);
  results.p50LatencyMs = Math.round(pct(lat, 50));
  results.p95LatencyMs = Math.round(pct(lat, 95));

  // ---- (d) peak RSS --------------------------------------------------------------------------
  const statusText = fs.readFileSync(`/proc/${child.pid}/status`, 'utf8');
  const hwm = /VmHWM:\s+(\d+) kB/.exec(statusText);
  results.peakRssMb = hwm ? Math.round(Number(hwm[1]) / 1024) : NaN;
  const st = JSON.parse(fs.readFileSync(statusFile, 'utf8'));
  notes.push(`ingest status: ${st.writer.flushes} flushes, ${st.writer.stagedFlushes} via staging, ${st.sources[0].deadLetters} dead letters`);

  child.kill('SIGTERM');
  await new Promise((r) => child.once('exit', r));
  cleanup = cleanup.filter((f) => f !== cleanup[cleanup.length - 1]);
} finally {
  for (const f of cleanup.reverse()) {
    try {
      f();
    } catch {
      // best effort
    }
  }
  await sleep(200);
  fs.rmSync(tmp, { recursive: true, force: true });
}

const targets: Record<string, string> = {
  writerRowsPerSec: '',
  psqlCopyRowsPerSec: '',
  writerRatio: '≥ 0.8',
  e2eSingleSamplesPerSec: '≥ 50 000',
  e2eBatchedSamplesPerSec: '≥ 200 000',
  p50LatencyMs: '',
  p95LatencyMs: '< 1000',
  peakRssMb: '< 300',
};
console.log(`\nFlocstream ingest benchmark — ${os.cpus().length} CPUs, ${os.cpus()[0]?.model ?? ''}`);
console.log('figure'.padEnd(26) + 'measured'.padStart(14) + '   target');
for (const [k, v] of Object.entries(results)) console.log(k.padEnd(26) + v.toLocaleString('en-US').padStart(14) + '   ' + (targets[k] ?? ''));
for (const n of notes) console.log(`note: ${n}`);
const out = path.join(ROOT, '.data', 'bench', 'ingest.json');
fs.mkdirSync(path.dirname(out), { recursive: true });
fs.writeFileSync(out, JSON.stringify({ measuredAt: new Date().toISOString(), cpus: os.cpus().length, ...results, notes }, null, 2));
console.log(`written ${path.relative(ROOT, out)}`);
process.exit(0);
