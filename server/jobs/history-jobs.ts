import fs from 'node:fs';
import { Readable, Writable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import { parse } from 'csv-parse';
import { parse as parseSync } from 'csv-parse/sync';
import type { Job } from 'bullmq';
import type { Balance } from '../../shared/contracts/balance.ts';
import type { EffectiveSettings } from '../../shared/contracts/settings.ts';
import { computeBalance } from '../../shared/domain/balance/assemble.ts';
import type { BalanceEngineInputs, LayoutIn, SeriesPoint, SignalReading, SviReading } from '../../shared/domain/balance/inputs.ts';
import type { Sample } from '../../ingest/pipeline/types.ts';
import { repositories, services, systemClock, type AppContext } from '../app-context.ts';
import { SqlPathRefused, type HistoryRepository, type MinuteRow, type TagWindow } from '../repositories/history.repository.ts';
import { queueBackend, type ClosableWorker, type SchedulingQueue } from './balance-engine.ts';
import { enqueueHistoryJob, registerHistoryQueue, type HistoryQueue } from './history-queue.ts';
import { RowChecker } from './history-rows.ts';
import { LineScanner } from './history-scan.ts';

export const HISTORY_QUEUE = 'flocstream-history';
/** Samples per COPY chunk into the staging partition. */
const STAGE_CHUNK = 20_000;
/** The job row's progress is written at most this often [ms]. */
const PROGRESS_EVERY_MS = 500;
/** Balances inserted per statement by the recompute. */
const INSERT_BATCH = 100;
const MINUTE_MS = 60_000;
const DAY_MS = 86_400_000;

export interface ImportOptions {
  file: string;
  layout: 'auto' | 'long' | 'wide';
  tsFormat: string;
  timezone: string;
  delimiter: string;
  dryRun: boolean;
  balanceStep_s?: number;
  bytes: number;
}
export interface RecomputeOptions {
  from: string;
  to: string;
  balanceStep_s?: number;
}

/** The first two records of the file (header and first data line), or null when the second line is beyond the first 64 KiB. */
function firstRecords(file: string, delimiter: string): string[][] | null {
  const fd = fs.openSync(file, 'r');
  try {
    const buf = Buffer.alloc(1 << 16);
    const n = fs.readSync(fd, buf, 0, buf.length, 0);
    const first = buf.indexOf(0x0a);
    const second = first < 0 ? -1 : buf.indexOf(0x0a, first + 1);
    const end = second >= 0 ? second : n < buf.length ? n : -1;
    if (end < 0) return null;
    return parseSync(buf.subarray(0, end), { delimiter, relax_column_count: true, skip_empty_lines: true, bom: true }) as string[][];
  } catch {
    return null;
  } finally {
    fs.closeSync(fd);
  }
}

const OFFSET_AT_END = /(?:Z|[+-]\d\d:\d\d)$/;

/**
 * The SQL path (long layout, ISO 8601 timestamps): LineScanner checks each line of the file in
 * its strict forms and rewrites it as a typed COPY row (tag id, the timestamp's text, the value,
 * the quality code); PostgreSQL's COPY parses timestamps and values in C, where the csv-parse path
 * spends about half its time parsing in this one thread, and the move into `samples` follows
 * (HistoryRepository.sqlImport). A file with any line outside the strict forms, an error
 * included, is refused with nothing stored, and the caller runs the csv-parse path over it, so
 * the line checks of history-rows.ts stay the one reference for what is accepted and which
 * lines are reported. Returns true when stored (or checked), else the reason it was refused.
 * Progress: the COPY (reading the file) is the first 40 %, the minute buckets, the move in
 * steps and the rollups the rest, written between the move's statements.
 */
async function runSqlImport(ctx: AppContext, repo: HistoryRepository, jobId: number, plantId: number, o: ImportOptions, checker: RowChecker, report: (p: number) => void): Promise<true | string> {
  if (o.tsFormat !== 'iso' || o.layout === 'wide') return 'not the long layout with ISO 8601 timestamps';
  const head = firstRecords(o.file, o.delimiter);
  if (!head || head.length < 2) return 'no data line in the first 64 KiB';
  if (!checker.header(head[0]!) || checker.layout !== 'long') return 'not the long layout';
  const localIsUtc = o.timezone === 'UTC' || o.timezone === 'Etc/UTC';
  if (!localIsUtc && !OFFSET_AT_END.test(head[1]![1] ?? '')) return 'local times in a time zone other than UTC';
  const began = performance.now();
  const resolve = (text: string) => {
    const c = checker.column(text);
    return typeof c === 'string' ? c : { tagId: c.tag.id, factor: c.factor, rangeLow: c.tag.rangeLow, rangeHigh: c.tag.rangeHigh };
  };
  const scanner = new LineScanner(o.delimiter.charCodeAt(0), head[0]!.length === 4 ? 4 : 3, localIsUtc, resolve);
  const COPY_SHARE = 0.4;
  let bytesRead = 0;
  let lastReport = 0;
  // The last progress write, awaited before the next one and before the job's end, so none lands after it.
  let written: Promise<unknown> = Promise.resolve();
  const write = (p: number, rows: number) => {
    report(p);
    written = written.then(() => repo.progress(jobId, { progress: p, rows, rejected: 0 })).catch(() => {});
    return written;
  };
  // An async generator (not .pipe) so a read error, or the first irregular line, reaches COPY's
  // pipeline and ends it: a file the SQL path leaves is not read to its end first.
  const source = Readable.from(
    (async function* () {
      for await (const chunk of fs.createReadStream(o.file, { highWaterMark: 1 << 16 }) as AsyncIterable<Buffer>) {
        const rows = scanner.push(chunk);
        if (scanner.irregular) throw new SqlPathRefused(scanner.irregular);
        bytesRead += chunk.length;
        const now = Date.now();
        if (now - lastReport >= PROGRESS_EVERY_MS) {
          lastReport = now;
          void write(COPY_SHARE * (o.bytes > 0 ? Math.min(1, bytesRead / o.bytes) : 0), scanner.lines);
        }
        if (rows.length) yield rows;
      }
      const rows = scanner.end();
      if (scanner.irregular) throw new SqlPathRefused(scanner.irregular);
      if (rows.length) yield rows;
    })(),
    { objectMode: false },
  );
  try {
    const r = await repo.sqlImport({
      source,
      dryRun: o.dryRun,
      copied: (copied) => {
        if (copied === 0) throw new SqlPathRefused('no data lines');
        if (scanner.lines !== copied) throw new SqlPathRefused(`${scanner.lines} lines scanned, ${copied} rows copied`);
      },
      progress: async (share) => {
        await write(COPY_SHARE + (1 - COPY_SHARE) * share, scanner.lines);
      },
    });
    await written;
    const timing = { path: 'sql', ...r.timing, totalSec: Math.round((performance.now() - began) / 100) / 10 };
    await finishImport(ctx, repo, jobId, plantId, o, r.rows, r.inserted, r.windows, timing);
    return true;
  } catch (err) {
    await written;
    if (err instanceof SqlPathRefused) return err.message;
    throw err;
  }
}

/** The job's end after a file without errors: its window, and the recompute job when rows were stored. */
async function finishImport(ctx: AppContext, repo: HistoryRepository, jobId: number, plantId: number, o: ImportOptions, rows: number, inserted: number | null, windows: readonly TagWindow[], timing: Record<string, unknown>): Promise<void> {
  const from_ms = Math.min(...windows.map((w) => w.from_ms));
  const to_ms = Math.max(...windows.map((w) => w.to_ms));
  const window = windows.length ? { from: new Date(from_ms).toISOString(), to: new Date(to_ms).toISOString() } : {};
  let recomputeJobId: number | null = null;
  // Before the job shows done (either path): the uploader's reads go to the primary until a replica shows these rows.
  if (inserted !== null && inserted > 0) await services(ctx).reads.routing.fenceUser((await repo.job(jobId))?.createdBy ?? null);
  if (inserted !== null && inserted > 0 && windows.length) {
    recomputeJobId = await repo.createJob({ plantId, kind: 'recompute', parentId: jobId, createdBy: null, options: { ...(window as { from: string; to: string }), ...(o.balanceStep_s ? { balanceStep_s: o.balanceStep_s } : {}) } satisfies RecomputeOptions });
    await enqueueHistoryJob(ctx, 'recompute', recomputeJobId);
  }
  await repo.finish(jobId, { state: 'done', rows, rejected: 0, errors: [], result: { inserted, ...window, recomputeJobId, timing } });
}

/**
 * An import job. A long-layout file with ISO 8601 timestamps first goes the SQL path
 * (runSqlImport); any other file, or one that path refuses, is read through csv-parse
 * (streaming, so a 1 GB file never sits in memory), every record checked
 * (server/jobs/history-rows.ts) and the accepted samples COPYed into the job's staging partition
 * while no line has failed; then, for a file without errors, the move into `samples` with its
 * rollups (HistoryRepository.move) and the recompute job for the window. A dry run only checks.
 * A failed file stores nothing and lists its lines.
 */
export async function runImport(ctx: AppContext, repo: HistoryRepository, jobId: number, report: (p: number) => void = () => {}, signal?: AbortSignal): Promise<void> {
  const job = await repo.job(jobId);
  if (!job) return;
  const o = job.options as unknown as ImportOptions;
  const tags = await repo.importTags(job.plantId);
  let sqlRefused: string;
  try {
    const sql = await runSqlImport(ctx, repo, jobId, job.plantId, o, new RowChecker(tags, o), report);
    if (sql === true) return void fs.rm(o.file, { force: true }, () => {});
    sqlRefused = sql;
  } catch (err) {
    await repo.finish(jobId, { state: 'failed', rows: 0, rejected: 0, errors: [], result: { message: `import failed: ${(err as Error).message}` } }).catch(() => {});
    fs.rm(o.file, { force: true }, () => {});
    throw err;
  }
  ctx.log.info({ jobId, reason: sqlRefused }, 'history import: the csv-parse path reads this file');
  if (signal?.aborted) {
    await repo.finish(jobId, { state: 'failed', rows: 0, rejected: 0, errors: [], result: { message: 'the API stopped before the import ended; nothing stored, upload the file again' } });
    fs.rm(o.file, { force: true }, () => {});
    return;
  }
  const began = performance.now();
  const checker = new RowChecker(tags, o);
  const stage = o.dryRun ? null : await repo.openStage(jobId);
  let storing = stage !== null;
  let headerOk = true;
  let seenHeader = false;
  let bytesRead = 0;
  let lastReport = 0;
  // 16 KiB reads (about 400 lines): csv-parse handles a read in one go, so a small read keeps
  // each turn of the event loop short (a few ms) and the API answering while a large file is
  // checked, even with the two cores shared; measured against 64 KiB on a loaded machine.
  const input = fs.createReadStream(o.file, { highWaterMark: 1 << 14 });
  input.on('data', (b) => (bytesRead += b.length));
  const tick = async () => {
    const now = Date.now();
    if (now - lastReport < PROGRESS_EVERY_MS) return;
    lastReport = now;
    // Reading and checking is 90 % of the job; the move the rest.
    const p = 0.9 * (o.bytes > 0 ? Math.min(1, bytesRead / o.bytes) : 0);
    report(p);
    await repo.progress(jobId, { progress: p, rows: checker.rows, rejected: checker.rejected });
  };
  let batch: Sample[] = [];
  const flush = async () => {
    if (storing && stage && batch.length) await stage.write(batch);
    batch = [];
  };
  const sink = new Writable({
    objectMode: true,
    highWaterMark: 512,
    writev(chunks: { chunk: { record: string[]; info: { lines: number } } }[], cb) {
      (async () => {
        if (signal?.aborted) throw new Error('the API stopped before the import ended; nothing stored, upload the file again');
        for (const { chunk } of chunks) {
          if (!seenHeader) {
            seenHeader = true;
            headerOk = checker.header(chunk.record);
            continue;
          }
          if (!headerOk) continue;
          // info.lines is the line the record ends on; a line break inside quotes moves its start up
          // (as csv.service.ts reports it): an error names the line the record starts on.
          let inside = 0;
          for (const f of chunk.record) for (let i = f.indexOf('\n'); i !== -1; i = f.indexOf('\n', i + 1)) inside++;
          checker.row(chunk.record, chunk.info.lines - inside, batch);
          if (checker.rejected > 0 && storing) {
            // The file will not be stored: stop staging, keep checking for the error list.
            storing = false;
            await stage?.abort();
          }
          if (!storing) batch.length = 0;
          else if (batch.length >= STAGE_CHUNK) await flush();
        }
        await tick();
        // Let waiting requests in between batches (setImmediate runs after pending I/O callbacks).
        await new Promise<void>((r) => setImmediate(r));
      })().then(() => cb(), cb);
    },
  });
  const parser = parse({ delimiter: o.delimiter, info: true, relax_column_count: true, skip_empty_lines: true, bom: true });
  const fail = async (message: string) => {
    if (storing) await stage?.abort();
    await repo.dropStage(jobId);
    await repo.finish(jobId, { state: 'failed', rows: checker.rows, rejected: checker.rejected, errors: checker.errors, result: { message } });
  };
  try {
    try {
      await pipeline(input, parser, sink);
    } catch (err) {
      const e = err as { code?: string; lines?: number; message: string };
      if (e.code?.startsWith('CSV_')) {
        checker.errors.push({ line: e.lines ?? 0, field: 'line', message: e.message });
        checker.rejected++;
        return await fail('the file is not valid CSV');
      }
      throw err;
    }
    if (!seenHeader || !headerOk) return await fail(seenHeader ? 'the header cannot be read' : 'the file is empty');
    if (checker.rejected > 0) return await fail(`${checker.rejected} line(s) refused; nothing stored`);
    if (checker.rows === 0) return await fail('the file has a header and no data lines');
    const windows = [...checker.window].map(([tagId, [from_ms, to_ms]]) => ({ tagId, from_ms, to_ms }));
    if (!stage) return await finishImport(ctx, repo, jobId, job.plantId, o, checker.rows, null, windows, { path: 'csv-parse', sqlRefused });
    await flush();
    await stage.end();
    const checkSec = (performance.now() - began) / 1000;
    report(0.9);
    await repo.progress(jobId, { progress: 0.9, rows: checker.rows, rejected: 0 });
    const moved = performance.now();
    const { inserted, insertSec, rollupSec } = await repo.move(jobId, [...checker.days], windows);
    await repo.dropStage(jobId);
    const timing = { path: 'csv-parse', sqlRefused, checkAndStageSec: Math.round(checkSec * 10) / 10, insertSec, rollupSec, moveSec: Math.round(((performance.now() - moved) / 1000) * 10) / 10 };
    await finishImport(ctx, repo, jobId, job.plantId, o, checker.rows, inserted, windows, timing);
  } catch (err) {
    await fail(`import failed: ${(err as Error).message}`).catch(() => {});
    throw err;
  } finally {
    input.destroy();
    fs.rm(o.file, { force: true }, () => {});
  }
}

/** Index of the first element of `a` (sorted by t_ms) with t_ms ≥ t. */
function lowerBound(a: readonly SeriesPoint[], t: number): number {
  let lo = 0;
  let hi = a.length;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (a[mid]!.t_ms < t) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

/** The window the balance reads before its plant clock (as balance-inputs.service.ts reads it live). */
function lookback_ms(s: EffectiveSettings): number {
  return Math.max(s['srt.window_h'] * 3_600_000, s['clarifier.integral_window_h'] * 3_600_000, s['alarm.blanket_rate_window_min'] * 60_000) + MINUTE_MS;
}

/**
 * The balance inputs as they were at `t`: each mapped tag's reading is the last sample of its
 * newest complete minute before t (from rollup_1m: last, last_ts, the bucket's quality), received
 * at its own sample time — ingest's receive times of an imported past are unknown, and the sample
 * time is what they would have been for a live feed; the series are the minute means of the
 * window ending there; the SVI is the newest lab entry sampled by t.
 */
export function inputsAsOf(t: number, layout: LayoutIn, mapped: readonly SignalReading[], minutes: ReadonlyMap<number, readonly MinuteRow[]>, svis: readonly SviReading[], window_ms: number): BalanceEngineInputs {
  const readings: SignalReading[] = [];
  const series = new Map<number, SeriesPoint[]>();
  let lastReceived_ms: number | null = null;
  for (const m of mapped) {
    const a = minutes.get(m.tagId) ?? [];
    const end = lowerBound(a, t - MINUTE_MS + 1);
    const last = end > 0 ? a[end - 1]! : null;
    readings.push({ ...m, value: last?.last ?? null, qualityCode: last?.qualityCode ?? 0, ts_ms: last?.lastTs_ms ?? null, receivedAt_ms: last?.lastTs_ms ?? null });
    if (last && (lastReceived_ms === null || last.lastTs_ms > lastReceived_ms)) lastReceived_ms = last.lastTs_ms;
    if (!series.has(m.tagId)) series.set(m.tagId, a.slice(lowerBound(a, t - window_ms), end) as SeriesPoint[]);
  }
  let svi: SviReading | null = null;
  for (const x of svis) if (x.sampledAt_ms <= t) svi = x;
  return { now_ms: t, layout, readings, series, svi, lastReceived_ms };
}

/**
 * Recomputes the balances of a window after an import: at the engine's interval (or the
 * coarser step the import asked for), through the same computeBalance, with the inputs as they
 * were at each time (inputsAsOf); rows are marked recomputed. Raises no alarm, sends no mail,
 * publishes nothing live. Recomputed rows of an earlier run over the window are replaced; a time
 * that already has a live balance keeps it.
 */
export async function runRecompute(ctx: AppContext, repo: HistoryRepository, jobId: number, report: (p: number) => void = () => {}, signal?: AbortSignal): Promise<void> {
  const job = await repo.job(jobId);
  if (!job) return;
  const o = job.options as unknown as RecomputeOptions;
  try {
    const s = await services(ctx).settings.effective(job.plantId);
    const balanceRepo = repositories(ctx).balance;
    // Geometry is effective-dated (issue 13): each time is computed with the layout that held
    // then. A day whose start and end layouts agree uses one; a day with a change asks per step.
    const layoutAt = async (t: number) => {
      const l = await balanceRepo.layoutAt(job.plantId, new Date(t));
      if (!l) throw new Error(`no plant ${job.plantId}`);
      return l;
    };
    const mapped = await balanceRepo.readings(job.plantId);
    const tagIds = [...new Set(mapped.map((m) => m.tagId))];
    const svis = (await repo.svis(job.plantId)).filter((x) => /^m[lL]\/g$/.test(x.unit.trim())).map(({ unit: _unit, ...x }) => x);
    const step = Math.max(s['balance.interval_s'], o.balanceStep_s ?? 0) * 1000;
    const from = Date.parse(o.from);
    const to = Date.parse(o.to);
    // The first time with a complete minute of the window behind it, on the step's grid.
    const t0 = Math.ceil((from + MINUTE_MS) / step) * step;
    // The last time is the window's end, never later and never past now: a grid time after the
    // last imported sample would be a balance of data the import did not bring (and, for the
    // demo's history that ends at its start, a "latest" balance from the future that hid the
    // live ones until the clock caught up with it).
    const end = Math.min(to, systemClock());
    const window_ms = lookback_ms(s);
    // Recomputed rows of an earlier run up to a step past the end are replaced (an earlier
    // version wrote one grid time past it).
    await repo.deleteRecomputed(job.plantId, new Date(t0), new Date(to + step));
    const live = await repo.liveBalanceTimes(job.plantId, new Date(t0 - step), new Date(end + 1));
    const total = Math.max(1, Math.floor((end - t0) / step) + 1);
    let done = 0;
    let li = 0;
    let pending: Balance[] = [];
    let lastReport = 0;
    for (let c0 = t0; c0 <= end; c0 += DAY_MS) {
      const c1 = Math.min(c0 + DAY_MS, end + 1);
      const minutes = await repo.minutes(tagIds, new Date(c0 - window_ms - MINUTE_MS), new Date(c1));
      const [first, last] = await Promise.all([layoutAt(c0), layoutAt(c1 - 1)]);
      const steady = JSON.stringify(first) === JSON.stringify(last);
      for (let t = c0; t < c1; t += step) {
        if (signal?.aborted) {
          // A shutdown: what is computed stays; the next start runs the job again over the window.
          await repo.insertRecomputed(pending);
          await repo.requeue(jobId);
          return;
        }
        while (li < live.length && live[li]! <= t - step) li++;
        if (li < live.length && live[li]! <= t) continue;
        const layout = steady ? first : await layoutAt(t);
        pending.push(computeBalance(inputsAsOf(t, layout, mapped, minutes, svis, window_ms), s));
        done++;
        if (pending.length >= INSERT_BATCH) {
          await repo.insertRecomputed(pending);
          pending = [];
        }
        if (Date.now() - lastReport > PROGRESS_EVERY_MS) {
          lastReport = Date.now();
          const p = Math.min(1, (t - t0) / (total * step));
          report(p);
          await repo.progress(jobId, { progress: p, rows: done, rejected: 0 });
        }
      }
    }
    await repo.insertRecomputed(pending);
    // The recomputed balances are the uploader's fresh write too (the recompute follows an import).
    await services(ctx).reads.routing.fenceUser(job.parentId === null ? null : ((await repo.job(job.parentId))?.createdBy ?? null));
    await repo.finish(jobId, { state: 'done', rows: done, rejected: 0, errors: [], result: { from: new Date(t0).toISOString(), to: o.to } });
  } catch (err) {
    await repo.finish(jobId, { state: 'failed', rows: 0, rejected: 0, errors: [], result: { message: `recompute failed: ${(err as Error).message}` } }).catch(() => {});
    throw err;
  }
}

export interface HistoryJobs {
  stop(): Promise<void>;
}

/**
 * The worker of history jobs (imports and recomputes, one at a time, BullMQ on the same backend
 * as the balance engine) for this context, and the queue the import service enqueues to. Every
 * API process runs one; a job runs in whichever takes it (the upload folder, `<dataDir>/imports`,
 * must then be one folder shared by the API processes that take imports).
 */
export async function startHistoryJobs(ctx: AppContext, opts: { databaseUrl?: string } = {}): Promise<HistoryJobs> {
  const url = opts.databaseUrl ?? ctx.config.databaseUrl;
  if (!url && !ctx.config.redisUrl) throw new Error('history jobs: no database URL for the job queue');
  const backend = queueBackend(ctx, url ?? '', HISTORY_QUEUE);
  const repo = repositories(ctx).history;
  const queue = backend.queue() as SchedulingQueue & HistoryQueue;
  const stopping = new AbortController();
  const worker: ClosableWorker = backend.worker(async (job: Job) => {
    const id = Number((job.data as { id?: number }).id);
    const report = (p: number) => void job.updateProgress(Math.round(p * 1000) / 1000).catch(() => {});
    // One run per row, whichever API process's worker gets the job: the row is claimed for this
    // BullMQ job first (a redelivery of the same job after its worker died may take it again; a
    // second job for the same row, queued by another process at its start, is skipped).
    if (!(await repo.claim(id, String(job.id)))) return { skipped: 'claimed' };
    if (job.name === 'import') return runImport(ctx, repo, id, report, stopping.signal);
    if (job.name === 'recompute') return runRecompute(ctx, repo, id, report, stopping.signal);
    throw new Error(`unknown history job ${job.name}`);
  });
  worker.on('failed', (job, err) => ctx.log.warn({ err, job: job?.name, data: job?.data }, 'history job failed'));
  worker.on('error', (err) => ctx.log.warn({ err }, 'history worker error'));
  registerHistoryQueue(ctx, queue);
  // Recomputes a previous run stopped (or left queued) go on.
  for (const id of await repo.unfinishedRecomputes()) await enqueueHistoryJob(ctx, 'recompute', id);
  return {
    async stop() {
      registerHistoryQueue(ctx, null);
      // The running job ends at its next step (a recompute is queued again for the next start).
      stopping.abort();
      await worker.close();
      await queue.close();
    },
  };
}
