/**
 * Read-API benchmark (`npm run bench:api`): a throwaway PostgreSQL cluster of its own and the
 * API in a child process, both on 127.0.0.1. Prints a table and writes `.data/bench/api.json`.
 * Every figure is measured in this run.
 *
 * Data, generated in SQL: one tag with 30 days of 1-second samples (2 592 000 raw rows in day
 * partitions), its rollup_1m and rollup_1h computed from them the way ingest aggregates (no bad
 * or null samples), 335 more days of rollup_1h before that (a year in all), 300 more tags with a
 * latest value, and 30 days of balances every 30 s.
 *
 * (a) sequential latency, 200 requests each after a warm-up: balance/live, the 30-day samples
 *     query and the one-year query (both must be answered from rollup_1h: 720 hourly points and
 *     1460 six-hour buckets, see chooseResolution in server/services/series.service.ts);
 * (b) mixed load: autocannon, 50 connections for 10 s over a mix of those and the live tag list,
 *     three rounds; the median p99 is held to < 250 ms; each round notes the CPU per request of
 *     the API process, of the PostgreSQL cluster and of autocannon, and what other processes
 *     took of the machine's cores (/proc/stat). Then each route alone for 3 s (its size and CPU
 *     per request), and the bounds: 50 connections in a closed loop on CPU-bound servers spend at
 *     least 50 × CPU per request ÷ cores on average (Little's law), and the heaviest answer,
 *     sharing the cores with 50 requests in flight, about its CPU × 50 ÷ cores; the bench prints
 *     both and, when the target is missed, whether the code's CPU or the neighbours bound it;
 * (c) balance/live beside the reference: tests/bench/api-baseline.ts, a minimal Express + pg
 *     process on the same database returning the same row as the same JSON (checked), measured
 *     with the same autocannon settings (50 connections, 1 s warm-up, 5 s), three rounds that
 *     alternate which side goes first; `balanceLiveRatio` = median product req/s ÷ median
 *     baseline req/s, held to ≥ 0.8. Every round notes the CPU seconds the server process and
 *     autocannon (this process) used, and the load average is printed: on a shared machine that
 *     says whether a figure measured the code or the neighbours.
 *
 * (d) with `--replica` (issue 18): a streaming replica of the bench cluster (pg_basebackup -R,
 *     tests/helpers/replica.ts) and a second API process with it as DATABASE_READ_URL; the
 *     30-day samples query at 50 connections on the API reading the primary and on the one
 *     reading the replica, three alternating rounds of 5 s (after 3 s of warm-up each), medians
 *     compared (`replicaRatio`).
 *     Both clusters share this machine's cores, so the figure is the cost of the routing on one
 *     host, not the gain of a second one.
 *
 * The API runs as `npm start` runs it (logger at info into <data>/logs/api.log). `--cpu-prof`
 * writes a CPU profile of the API process to .data/bench/prof/ (where per-request time goes).
 * The monitor's session cookie is used: the per-token rate limit applies to Bearer callers only.
 * Exit code 1 when a target is missed or any request failed.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import fs from 'node:fs';
import { createRequire } from 'node:module';
import net from 'node:net';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import pg from 'pg';
import { createApp } from '../../server/app.ts';
import type { AppContext } from '../../server/app-context.ts';
import { hashPassword } from '../../server/auth/passwords.ts';
import { loadConfig } from '../../server/config.ts';
import { openDatabase } from '../../server/db/client.ts';
import { startLocalPostgres } from '../../server/db/local-postgres.ts';
import { runMigrations } from '../../server/db/migrate.ts';
import { createLogger } from '../../server/logger.ts';
import { freePort } from '../helpers/net.ts';
import { startStreamingReplica } from '../helpers/replica.ts';

const ROOT = path.resolve(import.meta.dirname, '../..');
const SELF = fileURLToPath(import.meta.url);
const H = 3_600_000;
const DAY = 24 * H;
const RAW_DAYS = 30;
const SEQ_N = 200;
const WARMUP = 10;
const ROUNDS = 3;
const MIX_S = 10;
const LIVE_S = 5;
const ROUTE_S = 3;
const MIX_P99_MS = 250;
const LIVE_RATIO_TARGET = 0.8;
const BASELINE = path.join(import.meta.dirname, 'api-baseline.ts');

interface AutocannonResult {
  errors: number;
  timeouts: number;
  non2xx: number;
  requests: { average: number; total: number };
  latency: { p50: number; p90: number; p97_5: number; p99: number; max: number };
  duration: number;
}
type Autocannon = (opts: Record<string, unknown>) => Promise<AutocannonResult>;


function pct(sorted: number[], p: number): number {
  return sorted[Math.min(sorted.length - 1, Math.floor((p / 100) * sorted.length))] ?? NaN;
}
const round = (x: number, d = 1) => Math.round(x * 10 ** d) / 10 ** d;

async function generate(pool: pg.Pool, end: number): Promise<{ plantId: number; tagId: number; rawRows: number }> {
  const q = (text: string, values: unknown[] = []) => pool.query(text, values);
  const plantId = (await q(`INSERT INTO plants (code, name, peak_flow_m3h) VALUES ('bench', 'Bench', 5000) RETURNING id`)).rows[0].id;
  const src = (await q(`INSERT INTO sources (plant_id, name, kind, url) VALUES ($1, 'bench', 'mqtt', 'mqtt://127.0.0.1:1') RETURNING id`, [plantId])).rows[0].id;
  const tagId = (await q(`INSERT INTO tags (plant_id, source_id, name, address, unit, expected_period_s) VALUES ($1, $2, 'AB1_MLSS', 'b/ab1/mlss', 'g/L', 1) RETURNING id`, [plantId, src])).rows[0].id;
  await q(`INSERT INTO tags (plant_id, source_id, name, address, unit) SELECT $1, $2, 'T' || i, 'b/t' || i, 'm3/h' FROM generate_series(1, 300) i`, [plantId, src]);
  await q(`INSERT INTO tag_latest (tag_id, ts, value, quality) SELECT id, now() - (id % 20) * interval '1 s', id * 1.5, 0 FROM tags`);

  const start = end - RAW_DAYS * DAY;
  for (let d = Math.floor(start / DAY) * DAY; d < end; d += DAY) await q('SELECT flocstream_ensure_day_partition($1)', [new Date(d)]);
  // One day per statement, two at a time (the machine may have two cores).
  const days = Array.from({ length: RAW_DAYS }, (_, k) => start + k * DAY);
  const insertDay = async (d0: number) => {
    await q(
      `INSERT INTO samples (tag_id, ts, value, quality)
       SELECT $1, to_timestamp($2::float8 / 1000 + i), 3 + 0.5 * sin(($2::float8 / 1000 + i) / 600) + (i % 17) * 0.01, CASE WHEN i % 5000 = 0 THEN 5 ELSE 0 END
       FROM generate_series(0, 86399) i`,
      [tagId, d0],
    );
  };
  for (let k = 0; k < days.length; k += 2) await Promise.all(days.slice(k, k + 2).map(insertDay));
  const rawRows = Number((await q(`SELECT count(*) n FROM samples WHERE tag_id = $1`, [tagId])).rows[0].n);
  // Rollups as ingest computes them (ingest/sink/rollup.ts): good and uncertain samples with a value.
  await q(
    `INSERT INTO rollup_1m (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
     SELECT tag_id, date_trunc('minute', ts), min(value), max(value), sum(value), count(*), (array_agg(value ORDER BY ts DESC))[1], max(ts), (bit_or(quality & ~3) | max(quality & 3))
     FROM samples WHERE tag_id = $1 AND value IS NOT NULL AND (quality & 3) < 2 GROUP BY 1, 2`,
    [tagId],
  );
  await q(
    `INSERT INTO rollup_1h (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
     SELECT tag_id, date_trunc('hour', bucket), min(min), max(max), sum(sum), sum(count), (array_agg(last ORDER BY last_ts DESC))[1], max(last_ts), (bit_or(quality & ~3) | max(quality & 3))
     FROM rollup_1m WHERE tag_id = $1 GROUP BY 1, 2`,
    [tagId],
  );
  await q(
    `INSERT INTO rollup_1h (tag_id, bucket, min, max, sum, count, last, last_ts, quality)
     SELECT $1, b, v - 0.5, v + 0.5, v * 3600, 3600, v, b + interval '3599 s', 0
     FROM (SELECT b, 3 + 0.5 * sin(extract(epoch FROM b) / 600) AS v
           FROM generate_series(to_timestamp($2::float8 / 1000), to_timestamp($3::float8 / 1000) - interval '1 hour', interval '1 hour') b) x`,
    [tagId, end - 365 * DAY, start],
  );
  await q(
    `INSERT INTO balances (plant_id, ts, quality, data, inputs)
     SELECT $1, to_timestamp($2::float8 / 1000) + i * interval '30 s', CASE WHEN i % 97 = 0 THEN 'estimated' ELSE 'good' END,
       jsonb_build_object('aerationMass_kg', 48000 + 500 * sin(i / 120.0), 'clarifierMass_kg', 9000 + 300 * cos(i / 90.0), 'rasMargin', 0.2 + 0.05 * sin(i / 60.0),
                          'srtTotal_d', 11 + sin(i / 2880.0), 'srtAeration_d', 9.2 + sin(i / 2880.0), 'storm', jsonb_build_object('blanketRise_m', 0.12, 'storedFraction', 0.18)),
       jsonb_build_object('mlss_gL', 3.2, 'influentFlow_m3h', 2400, 'quality', 'good')
     FROM generate_series(0, $3::int - 1) i`,
    [plantId, start, (RAW_DAYS * DAY) / 30_000],
  );
  await q('ANALYZE');
  return { plantId, tagId, rawRows };
}

/** Starts `node --import tsx <entry> …args` and resolves once it prints `{"port":N}`. */
async function startServer(entry: string, args: string[], nodeArgs: string[] = []): Promise<{ child: ChildProcess; base: string }> {
  const child = spawn(process.execPath, [...nodeArgs, '--import', 'tsx', entry, ...args], { stdio: ['ignore', 'pipe', 'inherit'], cwd: ROOT });
  const port = await new Promise<number>((resolve, reject) => {
    let buf = '';
    child.stdout!.on('data', (c: Buffer) => {
      buf += c.toString();
      const line = buf.split('\n')[0];
      if (buf.includes('\n') && line) resolve(JSON.parse(line).port);
    });
    child.once('exit', (code) => reject(new Error(`${path.basename(entry)} exited (${code}) before listening`)));
  });
  return { child, base: `http://127.0.0.1:${port}` };
}

const stopChild = (child: ChildProcess) =>
  new Promise<void>((r) => {
    if (child.exitCode !== null) return r();
    child.once('exit', () => r());
    child.kill('SIGTERM');
  });

/** CPU seconds (user + system) a process has used so far, from /proc (Linux; 100 ticks per second). */
function cpuSeconds(pid: number | undefined): number {
  if (pid === undefined) return NaN;
  if (pid === process.pid) {
    const u = process.cpuUsage();
    return (u.user + u.system) / 1e6;
  }
  try {
    // Fields after the command name (which may hold spaces): utime and stime are the 12th and 13th.
    const stat = fs.readFileSync(`/proc/${pid}/stat`, 'utf8');
    const f = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
    return (Number(f[11]) + Number(f[12])) / 100;
  } catch {
    return NaN;
  }
}

/**
 * CPU seconds the bench's PostgreSQL cluster has used so far: the postmaster, its live children
 * (the pools' backends stay connected through a round) and the children it has reaped.
 */
function clusterCpuSeconds(pgData: string): number {
  try {
    const postmaster = Number(fs.readFileSync(path.join(pgData, 'postmaster.pid'), 'utf8').split('\n')[0]);
    const fields = (pid: number) => {
      const stat = fs.readFileSync(`/proc/${pid}/stat`, 'utf8');
      return stat.slice(stat.lastIndexOf(')') + 2).split(' ');
    };
    const own = fields(postmaster);
    // utime, stime, cutime, cstime are the 12th–15th fields after the command name.
    let ticks = Number(own[11]) + Number(own[12]) + Number(own[13]) + Number(own[14]);
    for (const entry of fs.readdirSync('/proc')) {
      if (!/^\d+$/.test(entry)) continue;
      try {
        const f = fields(Number(entry));
        if (Number(f[1]) === postmaster) ticks += Number(f[11]) + Number(f[12]);
      } catch {
        // gone meanwhile
      }
    }
    return ticks / 100;
  } catch {
    return NaN;
  }
}

/** CPU seconds the whole machine has spent busy so far (every process, all cores), from /proc/stat. */
function machineBusySeconds(): number {
  try {
    // cpu  user nice system idle iowait irq softirq steal …, in ticks of 1/100 s.
    const f = fs.readFileSync('/proc/stat', 'utf8').split('\n')[0]!.trim().split(/\s+/).slice(1, 9).map(Number);
    const [user, nice, system, , , irq, softirq, steal] = f as [number, number, number, number, number, number, number, number];
    return (user + nice + system + irq + softirq + steal) / 100;
  } catch {
    return NaN;
  }
}

const median = (xs: number[]) => {
  const s = [...xs].sort((a, b) => a - b);
  return s.length % 2 ? s[(s.length - 1) / 2]! : (s[s.length / 2 - 1]! + s[s.length / 2]!) / 2;
};
const loadavg = () => os.loadavg().map((x) => round(x, 2));

async function main(): Promise<void> {
  const t0 = performance.now();
  const loadAtStart = loadavg();
  const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-apibench-'));
  const cleanup: Array<() => void | Promise<void>> = [];
  const results: Record<string, unknown> = {};
  const failures: string[] = [];
  try {
    const cluster = await startLocalPostgres({ dataDir: tmp, port: await freePort(), dbName: 'bench' });
    cleanup.push(() => cluster.stop());
    await runMigrations(cluster.url);
    const pgData = path.join(tmp, 'pg');
    const pool = new pg.Pool({ connectionString: cluster.url, max: 3 });
    cleanup.push(() => pool.end());

    const end = Math.floor(Date.now() / H) * H;
    const tg = performance.now();
    const { plantId, tagId, rawRows } = await generate(pool, end);
    const generate_s = round((performance.now() - tg) / 1000);
    const password = randomBytes(12).toString('hex');
    await pool.query(`INSERT INTO users (email, name, role, password_hash) VALUES ('bench@bench.invalid', 'Bench', 'analyst', $1)`, [await hashPassword(password)]);
    console.log(`data: ${rawRows.toLocaleString('en-US')} raw samples, rollups, a year of rollup_1h, balances — ${generate_s} s`);

    const profile = process.argv.includes('--cpu-prof');
    const profDir = path.join(ROOT, '.data', 'bench', 'prof');
    const { child, base } = await startServer(SELF, ['--serve', cluster.url, tmp], profile ? ['--cpu-prof', `--cpu-prof-dir=${profDir}`] : []);
    cleanup.push(() => stopChild(child));
    const baseline = await startServer(BASELINE, [cluster.url]);
    cleanup.push(() => stopChild(baseline.child));
    const login = await fetch(`${base}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json' }, body: JSON.stringify({ email: 'bench@bench.invalid', password }) });
    if (login.status !== 200) throw new Error(`login failed: ${login.status}`);
    const cookie = (login.headers.get('set-cookie') ?? '').split(';')[0]!;

    const iso = (ms: number) => new Date(ms).toISOString();
    const paths = {
      balanceLive: `/api/v1/plants/${plantId}/balance/live`,
      samples30d: `/api/v1/plants/${plantId}/tags/${tagId}/samples?from=${iso(end - RAW_DAYS * DAY)}&to=${iso(end)}`,
      samples1y: `/api/v1/plants/${plantId}/tags/${tagId}/samples?from=${iso(end - 365 * DAY)}&to=${iso(end)}`,
      tags: `/api/v1/plants/${plantId}/tags`,
    };

    // ---- (a) sequential ----
    const seq: Record<string, { p50_ms: number; p95_ms: number; max_ms: number; n: number; resolution?: string; points?: number }> = {};
    for (const [name, p] of Object.entries(paths).filter(([n]) => n !== 'tags')) {
      const times: number[] = [];
      let info: { resolution?: string; points?: number } = {};
      for (let i = 0; i < WARMUP + SEQ_N; i++) {
        const s = performance.now();
        const r = await fetch(base + p, { headers: { Cookie: cookie } });
        const body = (await r.json()) as { resolution?: string; points?: unknown[]; balance?: unknown };
        const ms = performance.now() - s;
        if (r.status !== 200) throw new Error(`${name}: HTTP ${r.status}`);
        if (i >= WARMUP) times.push(ms);
        if (body.points) info = { resolution: body.resolution, points: body.points.length };
      }
      times.sort((a, b) => a - b);
      seq[name] = { n: SEQ_N, p50_ms: round(pct(times, 50), 2), p95_ms: round(pct(times, 95), 2), max_ms: round(times[times.length - 1]!, 2), ...info };
    }
    results.sequential = seq;
    if (seq.samples30d?.resolution !== '1h') failures.push(`30-day query used ${seq.samples30d?.resolution}, expected the rollup_1h`);
    if (seq.samples1y?.resolution !== '1h') failures.push(`one-year query used ${seq.samples1y?.resolution}, expected the rollup_1h`);
    for (const s of Object.values(seq)) if (s.points !== undefined && s.points > 2001) failures.push(`a history answer had ${s.points} points`);

    // ---- (b) mixed load, three rounds ----
    const autocannon = createRequire(import.meta.url)('autocannon') as Autocannon;
    const order = [paths.balanceLive, paths.samples30d, paths.balanceLive, paths.tags, paths.samples1y, paths.balanceLive];
    const mixRounds: Array<Record<string, number>> = [];
    for (let r = 0; r < ROUNDS; r++) {
      const c0 = cpuSeconds(child.pid);
      const pg0 = clusterCpuSeconds(pgData);
      const b0 = cpuSeconds(process.pid);
      const m0 = machineBusySeconds();
      const w0 = performance.now();
      const load = await autocannon({ url: base, connections: 50, duration: MIX_S, headers: { Cookie: cookie }, requests: order.map((p) => ({ method: 'GET', path: p })) });
      const wall_s = (performance.now() - w0) / 1000;
      const api_s = cpuSeconds(child.pid) - c0;
      const pg_s = clusterCpuSeconds(pgData) - pg0;
      const bench_s = cpuSeconds(process.pid) - b0;
      const machine_s = machineBusySeconds() - m0;
      const n = Math.max(1, load.requests.total);
      mixRounds.push({
        requests: load.requests.total,
        requestsPerSec: round(load.requests.average),
        p50_ms: load.latency.p50,
        p97_5_ms: load.latency.p97_5,
        p99_ms: load.latency.p99,
        max_ms: load.latency.max,
        // Mean time in the system of a closed loop (Little's law): connections ÷ throughput.
        mean_ms: round((50 * wall_s * 1000) / n),
        apiCpu_s: round(api_s, 2),
        apiCpuPerRequest_ms: round((api_s * 1000) / n, 2),
        pgCpu_s: round(pg_s, 2),
        pgCpuPerRequest_ms: round((pg_s * 1000) / n, 2),
        autocannonCpuPerRequest_ms: round((bench_s * 1000) / n, 2),
        cpuPerRequest_ms: round(((api_s + pg_s + bench_s) * 1000) / n, 2),
        // The machine's cores over the round, and what other processes took of them meanwhile.
        available_s: round(os.cpus().length * wall_s, 1),
        othersCpu_s: round(machine_s - api_s - pg_s - bench_s, 1),
      });
      if (load.errors || load.timeouts || load.non2xx) failures.push(`mixed load round ${r + 1}: ${load.errors} errors, ${load.timeouts} timeouts, ${load.non2xx} non-2xx`);
    }
    // Where the CPU of one cycle of the mix goes: each route alone, same connections, one short run.
    const byRoute: Record<string, { requestsPerSec: number; bytes: number; apiCpuPerRequest_ms: number; pgCpuPerRequest_ms: number }> = {};
    for (const [name, p] of Object.entries(paths)) {
      const bytes = (await (await fetch(base + p, { headers: { Cookie: cookie } })).arrayBuffer()).byteLength;
      const c0 = cpuSeconds(child.pid);
      const pg0 = clusterCpuSeconds(pgData);
      const r = await autocannon({ url: base + p, connections: 50, duration: ROUTE_S, headers: { Cookie: cookie } });
      const n = Math.max(1, r.requests.total);
      byRoute[name] = { requestsPerSec: round(r.requests.average), bytes, apiCpuPerRequest_ms: round(((cpuSeconds(child.pid) - c0) * 1000) / n, 2), pgCpuPerRequest_ms: round(((clusterCpuSeconds(pgData) - pg0) * 1000) / n, 2) };
      if (r.errors || r.timeouts || r.non2xx) failures.push(`${name} alone: ${r.errors} errors, ${r.timeouts} timeouts, ${r.non2xx} non-2xx`);
    }
    const cores = os.cpus().length;
    const cpuPerRequest = median(mixRounds.map((m) => m.cpuPerRequest_ms!));
    const others = median(mixRounds.map((m) => m.othersCpu_s! / m.available_s!));
    // Closed loop, CPU-bound: throughput ≤ cores ÷ CPU per request, so the mean time in the
    // system (connections ÷ throughput, Little's law) is at least connections × CPU per request ÷
    // cores even with the cores to itself; a percentile is never below the mean.
    const meanFloor_ms = round((50 * cpuPerRequest) / cores);
    results.load = {
      connections: 50,
      duration_s: MIX_S,
      mix: 'balance/live ×3, 30-day samples, one-year samples, live tags (301) per cycle',
      requestsPerSec: median(mixRounds.map((m) => m.requestsPerSec!)),
      p99_ms: median(mixRounds.map((m) => m.p99_ms!)),
      mean_ms: median(mixRounds.map((m) => m.mean_ms!)),
      cpuPerRequest_ms: cpuPerRequest,
      meanFloor_ms,
      othersShareOfCores: round(others, 2),
      byRoute,
      rounds: mixRounds,
    };

    // ---- (c) balance/live beside plain Express + pg, alternating, three rounds ----
    const livePath = paths.balanceLive;
    const baselinePath = `/plants/${plantId}/balance/live`;
    const productBody = (await (await fetch(base + livePath, { headers: { Cookie: cookie } })).json()) as { age_s: unknown };
    const baselineBody = (await (await fetch(baseline.base + baselinePath)).json()) as { age_s: unknown };
    if (JSON.stringify({ ...productBody, age_s: 0 }) !== JSON.stringify({ ...baselineBody, age_s: 0 })) failures.push(`the baseline does not answer the same JSON as the product: ${JSON.stringify(productBody).slice(0, 300)} vs ${JSON.stringify(baselineBody).slice(0, 300)}`);
    const runLive = async (who: 'product' | 'baseline') => {
      const opts = who === 'product' ? { url: base + livePath, headers: { Cookie: cookie } } : { url: baseline.base + baselinePath };
      const pid = who === 'product' ? child.pid : baseline.child.pid;
      await autocannon({ ...opts, connections: 50, duration: 1 }); // warm-up, not counted
      const c0 = cpuSeconds(pid);
      const b0 = cpuSeconds(process.pid);
      const r = await autocannon({ ...opts, connections: 50, duration: LIVE_S });
      if (r.errors || r.timeouts || r.non2xx) failures.push(`balance/live ${who}: ${r.errors} errors, ${r.timeouts} timeouts, ${r.non2xx} non-2xx`);
      const serverCpu_s = cpuSeconds(pid) - c0;
      return {
        requestsPerSec: round(r.requests.average),
        p50_ms: r.latency.p50,
        p99_ms: r.latency.p99,
        serverCpu_s: round(serverCpu_s, 2),
        // CPU per answered request: what the code costs, much less sensitive to the neighbours' load than req/s.
        serverCpuPerRequest_ms: round((serverCpu_s * 1000) / Math.max(1, r.requests.total), 3),
        autocannonCpu_s: round(cpuSeconds(process.pid) - b0, 2),
      };
    };
    const liveRounds: Array<{ order: string; product: Awaited<ReturnType<typeof runLive>>; baseline: Awaited<ReturnType<typeof runLive>>; ratio: number }> = [];
    for (let r = 0; r < ROUNDS; r++) {
      // Alternate which goes first, so a drift in the machine's load does not favour one side.
      const first = r % 2 === 0 ? 'product' : 'baseline';
      const a = await runLive(first);
      const b = await runLive(first === 'product' ? 'baseline' : 'product');
      const product = first === 'product' ? a : b;
      const base_ = first === 'product' ? b : a;
      liveRounds.push({ order: `${first} first`, product, baseline: base_, ratio: round(product.requestsPerSec / base_.requestsPerSec, 3) });
    }
    const productRps = median(liveRounds.map((x) => x.product.requestsPerSec));
    const baselineRps = median(liveRounds.map((x) => x.baseline.requestsPerSec));
    const balanceLiveRatio = round(productRps / baselineRps, 3);
    const productCpu = median(liveRounds.map((x) => x.product.serverCpuPerRequest_ms));
    const baselineCpu = median(liveRounds.map((x) => x.baseline.serverCpuPerRequest_ms));
    results.balanceLive = {
      connections: 50,
      duration_s: LIVE_S,
      productRequestsPerSec: productRps,
      baselineRequestsPerSec: baselineRps,
      balanceLiveRatio,
      medianOfRoundRatios: median(liveRounds.map((x) => x.ratio)),
      productCpuPerRequest_ms: productCpu,
      baselineCpuPerRequest_ms: baselineCpu,
      baseline: 'tests/bench/api-baseline.ts: Express + pg (pool of 20), one query per request, same row and JSON, no credentials or logging',
      rounds: liveRounds,
    };
    if (process.argv.includes('--replica')) {
      results.replica = await replicaPhase({ tmp, clusterUrl: cluster.url, pgData, primaryApi: { pid: child.pid, base, cookie }, password, path: paths.samples30d, autocannon, failures, cleanup });
    }
    results.data = { rawSamples: rawRows, generate_s };

    const targets: Array<[string, number, number]> = [
      ['balance/live p95', seq.balanceLive!.p95_ms, 50],
      ['30-day samples p95', seq.samples30d!.p95_ms, 300],
      ['one-year samples p95', seq.samples1y!.p95_ms, 300],
    ];
    for (const [name, v, limit] of targets) if (!(v < limit)) failures.push(`${name} ${v} ms ≥ ${limit} ms`);
    results.targets = targets.map(([name, v, limit]) => ({ name, measured_ms: v, target_ms: limit, ok: v < limit }));

    console.log(`\nFlocstream read-API benchmark — ${os.cpus().length} CPUs, ${os.cpus()[0]?.model ?? ''}`);
    console.log('query'.padEnd(22) + 'p50 ms'.padStart(9) + 'p95 ms'.padStart(9) + 'max ms'.padStart(9) + '  resolution  points   target p95');
    const tgt: Record<string, string> = { balanceLive: '< 50', samples30d: '< 300', samples1y: '< 300' };
    for (const [k, s] of Object.entries(seq)) {
      console.log(k.padEnd(22) + String(s.p50_ms).padStart(9) + String(s.p95_ms).padStart(9) + String(s.max_ms).padStart(9) + '  ' + (s.resolution ?? '-').padEnd(10) + String(s.points ?? '-').padStart(8) + '   ' + (tgt[k] ?? ''));
    }
    const l = results.load as { requestsPerSec: number; p99_ms: number; rounds: Array<Record<string, number>> };
    console.log(`\nmixed load: 50 connections, ${MIX_S} s per round (${(results.load as { mix: string }).mix})`);
    for (const [i, m] of l.rounds.entries()) {
      console.log(`  round ${i + 1}: ${m.requestsPerSec} req/s, mean ${m.mean_ms} ms, p50 ${m.p50_ms} ms, p97.5 ${m.p97_5_ms} ms, p99 ${m.p99_ms} ms, max ${m.max_ms} ms; CPU per request: API ${m.apiCpuPerRequest_ms} ms (${m.apiCpu_s} s), PostgreSQL ${m.pgCpuPerRequest_ms} ms (${m.pgCpu_s} s), autocannon ${m.autocannonCpuPerRequest_ms} ms; other processes ${m.othersCpu_s} of ${m.available_s} CPU s`);
    }
    console.log(`  median: ${l.requestsPerSec} req/s, p99 ${l.p99_ms} ms (target < ${MIX_P99_MS} ms)`);
    console.log(`  each route alone (50 connections, ${ROUTE_S} s): ` + Object.entries(byRoute).map(([k, r]) => `${k} ${Math.round(r.bytes / 1000)} kB, API ${r.apiCpuPerRequest_ms} + PostgreSQL ${r.pgCpuPerRequest_ms} ms CPU`).join('; '));
    console.log(
      `  CPU: API + PostgreSQL + autocannon used ${cpuPerRequest} ms per request (median); ${cores} cores serve at most ${round((cores * 1000) / cpuPerRequest)} req/s of this mix, ` +
        `so 50 connections in a closed loop spend at least 50 × ${cpuPerRequest} ÷ ${cores} = ${meanFloor_ms} ms per request on average (Little's law; measured mean ${median(l.rounds.map((m) => m.mean_ms!))} ms) and the p99 is above that mean; ` +
        `other processes took ${Math.round(others * 100)} % of the cores during the rounds`,
    );
    // The heaviest answer of the mix, served while 50 requests share the cores (the OS shares
    // them among PostgreSQL backends, the event loop interleaves requests between I/O waits), takes
    // about its CPU × 50 ÷ cores; it is one request in six, so the p99 falls among those.
    const [heavyName, heavy] = Object.entries(byRoute).sort(([, a], [, b]) => b.apiCpuPerRequest_ms + b.pgCpuPerRequest_ms - (a.apiCpuPerRequest_ms + a.pgCpuPerRequest_ms))[0]!;
    const heavyCpu_ms = round(heavy.apiCpuPerRequest_ms + heavy.pgCpuPerRequest_ms, 2);
    const p99Shared_ms = round((heavyCpu_ms * 50) / cores);
    console.log(`  heaviest answer: ${heavyName}, ${heavyCpu_ms} ms CPU (API + PostgreSQL); sharing ${cores} cores with 50 requests in flight it takes ≈ ${heavyCpu_ms} × 50 ÷ ${cores} = ${p99Shared_ms} ms, and at one request in six the p99 falls among those`);
    (results.load as Record<string, unknown>).p99Shared_ms = p99Shared_ms;
    if (!(l.p99_ms < MIX_P99_MS)) {
      console.log(
        meanFloor_ms >= MIX_P99_MS || p99Shared_ms >= MIX_P99_MS
          ? `  diagnosis: p99 < ${MIX_P99_MS} ms is out of reach on ${cores} cores with 50 connections: the CPU per request bounds the mean at ≥ ${meanFloor_ms} ms and the ${heavyName} answers at ≈ ${p99Shared_ms} ms even with the cores to themselves`
          : `  diagnosis: the machine was shared (other processes took ${Math.round(others * 100)} % of the cores): with the cores to itself the p99 would be near ${Math.max(meanFloor_ms, p99Shared_ms)} ms; run again on a quiet machine`,
      );
    }
    console.log(`\nbalance/live, 50 connections, ${LIVE_S} s per side per round (after 1 s warm-up each): product vs minimal Express + pg`);
    for (const [i, x] of liveRounds.entries()) {
      const side = (s: typeof x.product) => `${s.requestsPerSec} req/s (p50 ${s.p50_ms}, p99 ${s.p99_ms} ms; server ${s.serverCpu_s} CPU s = ${s.serverCpuPerRequest_ms} ms/request, autocannon ${s.autocannonCpu_s} CPU s)`;
      console.log(`  round ${i + 1} (${x.order}): product ${side(x.product)} | baseline ${side(x.baseline)} | ratio ${x.ratio}`);
    }
    console.log(`  median: product ${productRps} req/s, baseline ${baselineRps} req/s, balanceLiveRatio ${balanceLiveRatio} (target ≥ ${LIVE_RATIO_TARGET}); server CPU per request: product ${productCpu} ms, baseline ${baselineCpu} ms`);
    console.log(`load average before ${loadAtStart.join(' ')}, after ${loadavg().join(' ')} (1, 5, 15 min; ${os.cpus().length} CPUs shared with whatever else runs)`);
    results.loadAverage = { start: loadAtStart, end: loadavg() };
    if (!(l.p99_ms < MIX_P99_MS)) failures.push(`mixed-load p99 ${l.p99_ms} ms ≥ ${MIX_P99_MS} ms`);
    if (!(balanceLiveRatio >= LIVE_RATIO_TARGET)) failures.push(`balanceLiveRatio ${balanceLiveRatio} < ${LIVE_RATIO_TARGET}`);
    if (profile) console.log(`CPU profile of the API process: ${path.relative(ROOT, profDir)}/ (written when it stops)`);
  } finally {
    for (const f of cleanup.reverse()) {
      try {
        await f();
      } catch {
        // best effort
      }
    }
    fs.rmSync(tmp, { recursive: true, force: true });
  }
  results.total_s = round((performance.now() - t0) / 1000);
  results.failures = failures;
  const out = path.join(ROOT, '.data', 'bench', 'api.json');
  fs.mkdirSync(path.dirname(out), { recursive: true });
  fs.writeFileSync(out, JSON.stringify({ measuredAt: new Date().toISOString(), cpus: os.cpus().length, ...results }, null, 2));
  console.log(`total ${results.total_s} s; written ${path.relative(ROOT, out)}`);
  for (const f of failures) console.log(`MISSED: ${f}`);
  process.exit(failures.length ? 1 : 0);
}

/**
 * (d): the same read on the API that reads the primary and on a second API process whose read
 * routes read a streaming replica of the bench cluster, alternating, medians compared.
 */
async function replicaPhase(o: {
  tmp: string;
  clusterUrl: string;
  pgData: string;
  primaryApi: { pid: number | undefined; base: string; cookie: string };
  password: string;
  path: string;
  autocannon: Autocannon;
  failures: string[];
  cleanup: Array<() => void | Promise<void>>;
}) {
  const replica = await startStreamingReplica(o.clusterUrl, o.tmp);
  o.cleanup.push(() => replica.stop());
  // Caught up: the generated data replayed before anything is measured.
  const pool = new pg.Pool({ connectionString: o.clusterUrl, max: 1 });
  const standby = new pg.Pool({ connectionString: replica.urlOf(o.clusterUrl), max: 1 });
  try {
    const target = (await pool.query<{ l: string }>('SELECT pg_current_wal_lsn()::text AS l')).rows[0]!.l;
    for (const deadline = Date.now() + 120_000; ; ) {
      const r = await standby.query<{ ok: boolean }>('SELECT pg_last_wal_replay_lsn() >= $1::pg_lsn AS ok', [target]);
      if (r.rows[0]!.ok) break;
      if (Date.now() > deadline) throw new Error('the replica did not catch up within 120 s');
      await new Promise((r) => setTimeout(r, 100));
    }
  } finally {
    await pool.end();
    await standby.end();
  }
  const dataDir = fs.mkdtempSync(path.join(o.tmp, 'api-replica-'));
  const api = await startServer(SELF, ['--serve', o.clusterUrl, dataDir, replica.urlOf(o.clusterUrl)]);
  o.cleanup.push(() => stopChild(api.child));
  const login = await fetch(`${api.base}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json' }, body: JSON.stringify({ email: 'bench@bench.invalid', password: o.password }) });
  if (login.status !== 200) throw new Error(`login on the replica API failed: ${login.status}`);
  const sides = {
    primary: { ...o.primaryApi, pgData: o.pgData },
    replica: { pid: api.child.pid, base: api.base, cookie: (login.headers.get('set-cookie') ?? '').split(';')[0]!, pgData: replica.pgData },
  };
  for (const [name, side] of Object.entries(sides)) {
    // The replica API reads the primary until its LISTEN connection is up (read-routing.service.ts): give it 10 s.
    let read: string | null = null;
    for (const deadline = Date.now() + 10_000; read !== name && Date.now() < deadline; ) {
      const r = await fetch(side.base + o.path, { headers: { Cookie: side.cookie } });
      await r.arrayBuffer();
      read = r.headers.get('x-flocstream-read');
      if (read !== name) await new Promise((w) => setTimeout(w, 100));
    }
    if (read !== name) o.failures.push(`the ${name} API answered x-flocstream-read: ${read}`);
  }
  const run = async (name: keyof typeof sides) => {
    const side = sides[name];
    const opts = { url: side.base + o.path, headers: { Cookie: side.cookie }, connections: 50 };
    // Warm-up, not counted: 3 s, so the replica API (started just now, unlike the primary's,
    // which served the phases before) has its pool's 20 connections open and its statements prepared.
    await o.autocannon({ ...opts, duration: 3 });
    const c0 = cpuSeconds(side.pid);
    const pg0 = clusterCpuSeconds(side.pgData);
    const r = await o.autocannon({ ...opts, duration: LIVE_S });
    if (r.errors || r.timeouts || r.non2xx) o.failures.push(`samples from the ${name}: ${r.errors} errors, ${r.timeouts} timeouts, ${r.non2xx} non-2xx`);
    const n = Math.max(1, r.requests.total);
    return {
      requestsPerSec: round(r.requests.average),
      p50_ms: r.latency.p50,
      p99_ms: r.latency.p99,
      apiCpuPerRequest_ms: round(((cpuSeconds(side.pid) - c0) * 1000) / n, 3),
      pgCpuPerRequest_ms: round(((clusterCpuSeconds(side.pgData) - pg0) * 1000) / n, 3),
    };
  };
  const rounds: Array<{ order: string; primary: Awaited<ReturnType<typeof run>>; replica: Awaited<ReturnType<typeof run>> }> = [];
  for (let i = 0; i < ROUNDS; i++) {
    const first = i % 2 === 0 ? 'primary' : 'replica';
    const a = await run(first);
    const b = await run(first === 'primary' ? 'replica' : 'primary');
    rounds.push({ order: `${first} first`, primary: first === 'primary' ? a : b, replica: first === 'primary' ? b : a });
  }
  // autocannon leaves its last requests in the servers' queues: let both drain before anything
  // is stopped (a pool serves its waiting queries in order, so two small reads through the same
  // pool — a lab-results page is a read route too — answered behind them mean they are done).
  const probe = o.path.replace(/\/tags\/.*$/, '/lab-results?limit=1');
  for (const side of Object.values(sides)) for (let i = 0; i < 2; i++) await (await fetch(side.base + probe, { headers: { Cookie: side.cookie } })).arrayBuffer();
  const primaryRps = median(rounds.map((x) => x.primary.requestsPerSec));
  const replicaRps = median(rounds.map((x) => x.replica.requestsPerSec));
  const out = { path: '30-day samples (rollup_1m)', connections: 50, duration_s: LIVE_S, primaryRequestsPerSec: primaryRps, replicaRequestsPerSec: replicaRps, replicaRatio: round(replicaRps / primaryRps, 3), rounds };
  console.log(`\n30-day samples, 50 connections, ${LIVE_S} s per side per round: the API reading the primary vs a second API reading a streaming replica (same host)`);
  for (const [i, x] of rounds.entries()) {
    const side = (s: typeof x.primary) => `${s.requestsPerSec} req/s (p50 ${s.p50_ms}, p99 ${s.p99_ms} ms; API ${s.apiCpuPerRequest_ms} ms CPU/request, its cluster ${s.pgCpuPerRequest_ms} ms CPU/request)`;
    console.log(`  round ${i + 1} (${x.order}): primary ${side(x.primary)} | replica ${side(x.replica)}`);
  }
  console.log(`  median: primary ${primaryRps} req/s, replica ${replicaRps} req/s, replicaRatio ${out.replicaRatio}`);
  return out;
}

// ---- child mode: the API server alone in its own process ----------------------------------
if (process.argv[2] === '--serve') {
  const url = process.argv[3]!;
  const dataDir = process.argv[4]!;
  const config = { ...loadConfig({ FLOCSTREAM_DATA_DIR: dataDir, DATABASE_URL: url, FLOCSTREAM_DEMO: '0' }), databaseUrl: url };
  // The pools as server/main.ts opens them (default size, the API's statement_timeout).
  const db = openDatabase(url, { statementTimeout_ms: config.apiStatementTimeout_ms });
  // (d): a streaming replica for the read routes, as DATABASE_READ_URL gives one.
  const readDb = process.argv[5] ? openDatabase(process.argv[5], { statementTimeout_ms: config.apiStatementTimeout_ms }) : undefined;
  // The logger as `npm start` makes it (info to <data>/logs/api.log), so its cost is measured too.
  const ctx: AppContext = { db, ...(readDb ? { readDb } : {}), config, log: createLogger('api', config.logLevel, dataDir), sessionKey: randomBytes(32) };
  const server = createApp(ctx, { serveMonitor: false }).listen(0, '127.0.0.1', () => {
    process.stdout.write(JSON.stringify({ port: (server.address() as net.AddressInfo).port }) + '\n');
  });
  process.on('SIGTERM', () => {
    server.closeAllConnections();
    server.close(() => void Promise.all([db.close(), readDb?.close()]).then(() => process.exit(0)));
  });
} else {
  await main();
}
