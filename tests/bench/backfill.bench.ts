/**
 * npm run bench:backfill [-- --rows N] [--rounds R]   (default 10 000 000 rows, 3 rounds)
 *
 * The historian import end to end against a reference measured in the same run:
 * - reference: `psql \copy` of the same rows (tag id, time, value, quality as text) into the
 *   same `samples` table, which is then emptied again;
 * - product: the API as `npm start` runs it (scripts/api.ts, a process of its own) takes the
 *   long-layout CSV over HTTP (`POST /api/v1/plants/:id/history`, streamed from disk), checks
 *   every line, stages, moves into `samples` and rebuilds the rollups; the clock runs from the
 *   first byte sent to the import job's `done` (the balance recompute that follows is timed apart).
 * The API process's peak RSS is its VmHWM (Linux /proc/<pid>/status) read at the end. Each figure
 * is the median of R rounds (the ratio: the median of each round's ratio, both sides measured at
 * the same load); every round, with the job's phase times, is in the notes.
 * Writes .data/bench/backfill.json. Targets: backfillRatio ≥ 0.5, API peak RSS < 400 MB.
 */
import { spawn, spawnSync } from 'node:child_process';
import fs from 'node:fs';
import { once } from 'node:events';
import os from 'node:os';
import path from 'node:path';
import { Readable } from 'node:stream';
import pg from 'pg';
import { localPsql, startLocalPostgres } from '../../server/db/local-postgres.ts';
import { runMigrations } from '../../server/db/migrate.ts';
import { waitForLine } from '../../scripts/children.ts';
import { API_READY } from '../../scripts/launcher.ts';
import { freePort } from '../helpers/net.ts';

const ROOT = path.resolve(import.meta.dirname, '../..');
const argv = process.argv.slice(2);
const rowsAt = argv.indexOf('--rows');
const ROWS = rowsAt >= 0 ? Number(argv[rowsAt + 1]) : 10_000_000;
const roundsAt = argv.indexOf('--rounds');
const ROUNDS = roundsAt >= 0 ? Number(argv[roundsAt + 1]) : 3;
if (!Number.isInteger(ROUNDS) || ROUNDS < 1 || ROUNDS > 5) throw new Error('--rounds takes 1 to 5');
if (!Number.isInteger(ROWS) || ROWS < 1000) throw new Error('--rows takes a whole number ≥ 1000');
const TAGS = 20;
const STEPS = Math.ceil(ROWS / TAGS);
const HOUR = 3_600_000;

const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-backfill-'));
fs.chmodSync(tmp, 0o755);
const cleanup: (() => void)[] = [];
const results: Record<string, number | string> = {};
const notes: string[] = [];
const say = (m: string) => console.log(`[bench:backfill] ${m}`);

/** The job's timing entries as text: seconds (`…Sec`) as `name N s`, the rest (path taken, steps, conflicts) as `name value`. */
function phaseText(timing: Record<string, unknown>): string {
  return Object.entries(timing)
    .filter(([, v]) => v !== null && v !== undefined)
    .map(([k, v]) => (typeof v === 'number' && k.endsWith('Sec') ? `${k} ${v} s` : `${k} ${String(v)}`))
    .join(', ');
}

function rssPeak_MB(pid: number): number {
  const s = fs.readFileSync(`/proc/${pid}/status`, 'utf8');
  return Number(/VmHWM:\s+(\d+) kB/.exec(s)![1]) / 1024;
}

try {
  const pgPort = await freePort();
  const cluster = await startLocalPostgres({ dataDir: tmp, port: pgPort, dbName: 'bench' });
  cleanup.push(() => cluster.stop());
  await runMigrations(cluster.url);
  const pool = new pg.Pool({ connectionString: cluster.url, max: 2 });
  cleanup.push(() => void pool.end());
  const plant = (await pool.query(`INSERT INTO plants (code, name) VALUES ('bench', 'Bench') RETURNING id`)).rows[0].id;
  const source = (await pool.query(`INSERT INTO sources (plant_id, name, kind, url, options) VALUES ($1, 'bench', 'mqtt', 'mqtt://127.0.0.1:1', '{"topics":["b/#"],"protocolVersion":4}') RETURNING id`, [plant])).rows[0].id;
  await pool.query(`INSERT INTO tags (plant_id, source_id, name, address, unit, range_low, range_high) SELECT $1, $2, 'FIT-' || (100 + i), 'b/' || i, 'm3/h', 0, 5000 FROM generate_series(0, $3 - 1) i`, [plant, source, TAGS]);
  const tags: { id: number; name: string }[] = (await pool.query(`SELECT id, name FROM tags ORDER BY id`)).rows;

  // The same rows twice: the CSV the product takes (tag names) and the text psql takes (tag ids).
  // Grouped by tag and in time order, as a historian exports; one value per second, ending an hour ago.
  const t0 = Math.floor((Date.now() - HOUR) / HOUR) * HOUR - STEPS * 1000;
  const csv = path.join(tmp, 'history.csv');
  const tsv = path.join(tmp, 'history.tsv');
  const a = fs.createWriteStream(csv);
  const b = fs.createWriteStream(tsv);
  a.write('tag,ts,value,quality\n');
  let n = 0;
  for (const t of tags) {
    let ca = '';
    let cb = '';
    for (let i = 0; i < STEPS && n < ROWS; i++, n++) {
      const ts = new Date(t0 + i * 1000).toISOString();
      const v = Math.round((1000 + 300 * Math.sin(i / 600) + (i % 7)) * 10) / 10;
      ca += `${t.name},${ts},${v},good\n`;
      cb += `${t.id}\t${ts}\t${v}\t0\n`;
      if (ca.length > 1 << 16) {
        if (!a.write(ca)) await once(a, 'drain');
        if (!b.write(cb)) await once(b, 'drain');
        ca = cb = '';
      }
    }
    a.write(ca);
    b.write(cb);
  }
  a.end();
  b.end();
  await Promise.all([once(a, 'finish'), once(b, 'finish')]);
  fs.chmodSync(tsv, 0o644);
  const bytes = fs.statSync(csv).size;
  say(`${ROWS} rows, ${TAGS} tags, CSV ${(bytes / 1e6).toFixed(0)} MB`);
  const days = [...new Set(Array.from({ length: Math.ceil((STEPS * 1000) / 86_400_000) + 1 }, (_, d) => Math.floor((t0 + d * 86_400_000) / 86_400_000)))];
  for (const d of days) await pool.query('SELECT flocstream_ensure_day_partition($1)', [new Date(d * 86_400_000)]);

  const ps = localPsql(tmp)!;
  const isRoot = process.getuid?.() === 0;
  const args = ['-h', ps.sockDir, '-p', String(pgPort), '-U', 'postgres', '-d', 'bench', '-v', 'ON_ERROR_STOP=1', '-c', `\\copy samples (tag_id, ts, value, quality) FROM '${tsv}'`];
  // Every round starts from the same empty tables, vacuumed and checkpointed.
  const reset = async () => {
    await pool.query('TRUNCATE samples, rollup_1m, rollup_1h, tag_latest, balances');
    await pool.query('VACUUM ANALYZE samples');
    await pool.query('CHECKPOINT');
  };

  const email = 'bench@bench.invalid';
  const password = 'bench-password-123';
  const apiPort = await freePort();
  const api = spawn(process.execPath, ['--import', 'tsx', 'scripts/api.ts'], {
    cwd: ROOT,
    // SMTP_URL names a relay that is never used (no plant has alarms here), so no mail catcher port is taken.
    env: { ...process.env, DATABASE_URL: cluster.url, PORT: String(apiPort), SMTP_URL: 'smtp://127.0.0.1:9', FLOCSTREAM_DATA_DIR: path.join(tmp, 'data'), FLOCSTREAM_DEMO: '0', FLOCSTREAM_ADMIN_EMAIL: email, FLOCSTREAM_ADMIN_PASSWORD: password, LOG_LEVEL: 'warn' },
    stdio: ['ignore', 'pipe', 'inherit'],
  });
  cleanup.push(() => api.kill('SIGKILL'));
  const url = (await waitForLine(api, 'api', API_READY))[1]!;
  // A signed-in write names its origin (server/auth/csrf.ts), as a browser does.
  const login = await fetch(`${url}/api/v1/auth/login`, { method: 'POST', headers: { 'Content-Type': 'application/json', Origin: url }, body: JSON.stringify({ email, password }) });
  if (login.status !== 200) throw new Error(`login: ${login.status}`);
  const cookie = login.headers.getSetCookie().map((c) => c.split(';')[0]).join('; ');
  const rssBefore = rssPeak_MB(api.pid!);
  type JobOut = { state: string; rows: number; progress: number; inserted: number | null; recomputeJobId: number | null; message: string | null };
  const job = async (id: number) => (await (await fetch(`${url}/api/v1/jobs/${id}`, { headers: { cookie } })).json()) as JobOut;
  const settle = async (id: number) => {
    let j = await job(id);
    // Polled every 250 ms: the end is known to within 1 % of a run of half a minute or more.
    while (j.state === 'queued' || j.state === 'running') {
      await new Promise((res) => setTimeout(res, 250));
      j = await job(id);
    }
    return j;
  };

  const rounds: { psqlSec: number; importSec: number; uploadSec: number; phases: Record<string, unknown>; recomputeSec: number | null; load1: number }[] = [];
  for (let round = 1; round <= ROUNDS; round++) {
    // ---- reference: psql \copy into samples ------------------------------------------------
    await reset();
    let t = performance.now();
    const r = isRoot ? spawnSync('runuser', ['-u', 'postgres', '--', ps.psql, ...args], { encoding: 'utf8' }) : spawnSync(ps.psql, args, { encoding: 'utf8' });
    const psqlSec = (performance.now() - t) / 1000;
    if (r.status !== 0) throw new Error(`psql \\copy failed: ${r.stderr}`);
    await reset();

    // ---- product: the API process takes the file over HTTP ---------------------------------
    t = performance.now();
    const up = await fetch(`${url}/api/v1/plants/${plant}/history?balanceStep_s=3600`, {
      method: 'POST',
      headers: { 'Content-Type': 'text/csv', cookie, Origin: url },
      body: Readable.toWeb(fs.createReadStream(csv)) as unknown as BodyInit,
      duplex: 'half',
    } as RequestInit);
    if (up.status !== 202) throw new Error(`upload: ${up.status} ${await up.text()}`);
    const uploadSec = (performance.now() - t) / 1000;
    const { jobId } = (await up.json()) as { jobId: number };
    const j = await settle(jobId);
    const importSec = (performance.now() - t) / 1000;
    if (j.state !== 'done' || j.inserted !== ROWS) throw new Error(`import ended ${j.state} with ${j.inserted} rows inserted: ${j.message}`);
    const stored = Number((await pool.query('SELECT count(*) AS n FROM samples')).rows[0].n);
    if (stored !== ROWS) throw new Error(`samples holds ${stored} rows, expected ${ROWS}`);
    const result = (await pool.query(`SELECT result FROM history_jobs WHERE id = $1`, [jobId])).rows[0].result as { timing?: Record<string, unknown> };
    let recomputeSec: number | null = null;
    if (j.recomputeJobId) {
      const t1 = performance.now();
      await settle(j.recomputeJobId);
      recomputeSec = (performance.now() - t1) / 1000;
    }
    const load1 = os.loadavg()[0]!;
    rounds.push({ psqlSec, importSec, uploadSec, phases: result.timing ?? {}, recomputeSec, load1 });
    const phases = phaseText(result.timing ?? {});
    say(`round ${round}: psql \\copy ${psqlSec.toFixed(1)} s, product ${importSec.toFixed(1)} s (upload ${uploadSec.toFixed(1)} s; job: ${phases}), ratio ${(psqlSec / importSec).toFixed(2)}, load ${load1.toFixed(1)}`);
  }
  const median = (xs: number[]) => [...xs].sort((x, y) => x - y)[Math.floor(xs.length / 2)]!;
  const psqlSec = median(rounds.map((x) => x.psqlSec));
  const importSec = median(rounds.map((x) => x.importSec));
  results.psqlCopyRowsPerSec = Math.round(ROWS / psqlSec);
  results.backfillRowsPerSec = Math.round(ROWS / importSec);
  // The ratio of each round (same run, same load), then their median.
  results.backfillRatio = Math.round(median(rounds.map((x) => x.psqlSec / x.importSec)) * 100) / 100;
  const recomputes = rounds.map((x) => x.recomputeSec).filter((x): x is number => x !== null);
  if (recomputes.length) {
    results.recomputeSec = Math.round(median(recomputes) * 10) / 10;
    notes.push(`recompute (hourly balances over the window, no signal mapped in the bench plant): ${results.recomputeSec} s after the import (median)`);
  }
  results.apiPeakRssMB = Math.round(rssPeak_MB(api.pid!));
  results.rows = ROWS;
  results.csvMB = Math.round(bytes / 1e6);
  results.rounds = ROUNDS;
  notes.push(`medians of ${ROUNDS} round(s): psql \\copy ${psqlSec.toFixed(1)} s; product ${importSec.toFixed(1)} s; API RSS ${rssBefore.toFixed(0)} MB before, peak ${results.apiPeakRssMB} MB`);
  for (const [i, x] of rounds.entries()) notes.push(`round ${i + 1}: psql ${x.psqlSec.toFixed(1)} s, product ${x.importSec.toFixed(1)} s (upload ${x.uploadSec.toFixed(1)} s; ${phaseText(x.phases)}), ratio ${(x.psqlSec / x.importSec).toFixed(2)}, load ${x.load1.toFixed(1)}`);
  notes.push(`load average ${os.loadavg().map((x) => x.toFixed(1)).join(' ')} (2 cores shared: read the ratio, not the absolute figures)`);
  api.kill('SIGTERM');
  await once(api, 'exit');

  console.table([{ rows: ROWS, psqlCopyRowsPerSec: results.psqlCopyRowsPerSec, backfillRowsPerSec: results.backfillRowsPerSec, backfillRatio: results.backfillRatio, apiPeakRssMB: results.apiPeakRssMB }]);
  for (const x of notes) say(x);
  say(`targets: backfillRatio ≥ 0.5 → ${Number(results.backfillRatio) >= 0.5 ? 'met' : 'NOT met'}; API peak RSS < 400 MB → ${Number(results.apiPeakRssMB) < 400 ? 'met' : 'NOT met'}`);
  const out = path.join(ROOT, '.data', 'bench');
  fs.mkdirSync(out, { recursive: true });
  fs.writeFileSync(path.join(out, 'backfill.json'), JSON.stringify({ ...results, notes, at: new Date().toISOString() }, null, 2) + '\n');
} finally {
  for (const c of cleanup.reverse()) {
    try {
      c();
    } catch {
      /* best effort */
    }
  }
  fs.rmSync(tmp, { recursive: true, force: true });
}
