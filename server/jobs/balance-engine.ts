import { randomBytes } from 'node:crypto';
import os from 'node:os';
import { Queue, Worker, createPostgresBackend, type Job } from 'bullmq';
import type { AlarmOut } from '../../shared/contracts/alarm.ts';
import type { Balance } from '../../shared/contracts/balance.ts';
import { repositories, services, type AppContext } from '../app-context.ts';
import { NotFoundError } from '../http/errors.ts';
import { startMailCatcher, type MailCatcher } from '../mail/catcher.ts';
import { createAlarmService, type AlarmChange } from '../services/alarm.service.ts';
import { readBalanceInputs } from '../services/balance-inputs.service.ts';
import { createOperatingSettlingService } from '../services/operating-settling.service.ts';
import { computeBalance } from '../../shared/domain/balance/assemble.ts';
import { workerSpools } from '../services/ingest-status.service.ts';
import { createMailService, smtpTransport } from '../services/mail.service.ts';

export const BALANCE_QUEUE = 'flocstream-balance';
/** How often the plant list and the intervals/cron settings are re-read into job schedulers [ms]. */
const SYNC_EVERY_MS = 15_000;
/** Interval claims older than this are pruned by the sync job [ms]. */
const CLAIM_KEEP_MS = 2 * 86_400_000;

export interface BalanceEngineOptions {
  /** Database URL for the PostgreSQL queue backend (default ctx.config.databaseUrl). */
  databaseUrl?: string;
  /** Schedule repeatable jobs and run a worker (default true); false: runOnce only. */
  schedule?: boolean;
  /** Start the built-in SMTP catcher when SMTP_URL is not set (default true). */
  mailCatcher?: boolean;
  /** Catcher port; default the global setting mail.catcher_port (0 = any free port). */
  catcherPort?: number;
  /** Wall clock (tests); default Date.now. */
  now?: () => number;
  /** This engine's name in `balance_claims.claimed_by` (default host:pid:random). */
  name?: string;
}

export interface BalanceEngine {
  stop(): Promise<void>;
  /** Computes and stores a balance now, without claiming its interval (tests, tools); the scheduled jobs claim. */
  runOnce(plantId: number): Promise<Balance>;
  /** Sends the shift summary of the 24 h before now for one plant (what the daily job does). */
  shiftSummary(plantId: number): Promise<boolean>;
  /** The catcher's SMTP URL when it runs. */
  catcherUrl: string | null;
  /** This engine's name, as written in the interval claims it wins. */
  name: string;
}

/** The interval a computation at `t_ms` belongs to: `t` floored to the interval on the Unix epoch [ms]. */
export function intervalStart(t_ms: number, interval_s: number): number {
  const every = interval_s * 1000;
  return Math.floor(t_ms / every) * every;
}

type JobData = { plantId?: number };

/** The part of a BullMQ Queue the engine uses (the same for the Redis and PostgreSQL backends). */
export interface SchedulingQueue {
  upsertJobScheduler(id: string, repeat: { every?: number; pattern?: string; tz?: string }, template: { name: string; data: JobData }): Promise<unknown>;
  getJobSchedulers(): Promise<{ key: string }[]>;
  removeJobScheduler(id: string): Promise<boolean>;
  close(): Promise<void>;
}
export interface ClosableWorker {
  on(event: 'failed', fn: (job: Job | undefined, err: Error) => void): unknown;
  on(event: 'error', fn: (err: Error) => void): unknown;
  close(): Promise<void>;
}
type Processor = (j: Job<JobData>) => Promise<unknown>;

/** BullMQ connection: PostgreSQL by default (STACK.md "BullMQ without Redis"), Redis when REDIS_URL is set; also the history jobs' queue (server/jobs/history-jobs.ts). */
export function queueBackend(ctx: AppContext, databaseUrl: string, name = BALANCE_QUEUE) {
  if (ctx.config.redisUrl) {
    const u = new URL(ctx.config.redisUrl);
    const connection = {
      host: u.hostname,
      port: Number(u.port || 6379),
      ...(u.password ? { password: decodeURIComponent(u.password) } : {}),
      ...(u.username ? { username: decodeURIComponent(u.username) } : {}),
      ...(u.pathname.length > 1 ? { db: Number(u.pathname.slice(1)) } : {}),
      maxRetriesPerRequest: null,
    };
    return {
      queue: (): SchedulingQueue => new Queue(name, { connection }) as unknown as SchedulingQueue,
      worker: (fn: Processor): ClosableWorker => new Worker(name, fn, { connection, concurrency: 1 }) as unknown as ClosableWorker,
    };
  }
  const connection = { connectionString: databaseUrl, schema: 'bullmq', migrate: true, max: 3 };
  return {
    queue: (): SchedulingQueue => new Queue(name, { connection }, createPostgresBackend) as unknown as SchedulingQueue,
    worker: (fn: Processor): ClosableWorker => new Worker(name, fn as never, { connection, concurrency: 1 }, createPostgresBackend) as unknown as ClosableWorker,
  };
}

/** A small headline of a balance for the stream (a pg_notify payload is limited to 8000 bytes). */
function balanceHeadline(id: number, b: Balance) {
  const v = (f: { value: number | null; quality: string }) => ({ value: f.value, quality: f.quality });
  return {
    id,
    plantId: b.plantId,
    ts: b.ts,
    quality: b.quality,
    totalMass_kg: v(b.data.inventory.totalMass_kg),
    storedFraction: v(b.data.inventory.storedFraction),
    srt_d: v(b.data.srt.total_d),
    wasAdvice_m3h: v(b.data.srt.wasAdvice_m3h),
    trains: b.data.trains.map((t) => ({ code: t.code, concentrationMargin: v(t.ras.concentrationMargin), pumpMargin: v(t.ras.pumpMargin) })),
  };
}

/**
 * The live balance engine (design §3, §4): one repeatable BullMQ job per plant every
 * `balance.interval_s` computes the balance, stores it in `balances`, evaluates the alarms and
 * publishes both on the cross-process stream (pg_notify 'flocstream_stream'); one daily job per
 * plant mails the shift summary (`mail.summary_cron`, plant time zone). Plants added later and
 * changed intervals are picked up every 15 s. Mail goes to SMTP_URL, else to the built-in
 * catcher (stored in mail_outbox).
 *
 * Any number of API processes may run it against one database: the schedulers and their jobs
 * live in the queue's backend (the `bullmq` schema, or Redis), so each tick is one job that one
 * worker takes, and each interval is claimed in `balance_claims` before it is computed
 * (`scheduled` below), so a plant's interval is computed and stored once whichever process wins.
 */
export async function startBalanceEngine(ctx: AppContext, opts: BalanceEngineOptions = {}): Promise<BalanceEngine> {
  const now = opts.now ?? Date.now;
  const name = opts.name ?? `${os.hostname()}:${process.pid}:${randomBytes(3).toString('hex')}`;
  const { settings, audit } = services(ctx);
  const repos = repositories(ctx);
  const repo = repos.balance;
  const lab = repos.lab;
  // Kept for the engine's life: the operating settling fit reads each hour of history once.
  const operating = createOperatingSettlingService({ balanceRepo: repo });
  let catcher: MailCatcher | null = null;
  if (!ctx.config.smtpUrl && opts.mailCatcher !== false) {
    const port = opts.catcherPort ?? (await settings.effective(0))['mail.catcher_port'];
    catcher = await startMailCatcher(ctx.db, ctx.log, port);
    ctx.log.info({ url: catcher.url }, 'mail catcher listening (messages stored in mail_outbox)');
  }
  const mailUrl = ctx.config.smtpUrl ?? catcher?.url ?? null;
  const mail = mailUrl
    ? createMailService({ transport: smtpTransport(mailUrl, { catcher: !ctx.config.smtpUrl }), settings, notificationRepo: repos.notifications, balanceRepo: repo, alarmRepo: repos.alarms, log: ctx.log })
    : null;

  const onAlarm = async (a: AlarmOut, change: AlarmChange) => {
    await repos.stream.notify(a.plantId, 'alarm', { change, alarm: a }).catch((err) => ctx.log.warn({ err }, 'alarm notify failed'));
    // Mail only what is annunciated: a new alarm, or one whose shelf expired (ISA-18.2); suppressed and shelved ones are listed only.
    if ((change === 'raised' || change === 'unshelved') && mail) await mail.alarm(a);
  };
  const alarms = createAlarmService({ alarmRepo: repos.alarms, audit, clock: now, changed: onAlarm, spoolWorkers: async () => workerSpools(await repos.ingest.workers()) });

  async function compute(plantId: number, s: Awaited<ReturnType<typeof settings.effective>>, t: number): Promise<Balance> {
    const inputs = await readBalanceInputs(repo, plantId, s, t, { lab, operating });
    if (!inputs) throw new NotFoundError(`no plant ${plantId}`);
    const b = computeBalance(inputs, s);
    const id = await repo.insert(b);
    await repos.stream.notify(plantId, 'balance', balanceHeadline(id, b)).catch((err) => ctx.log.warn({ err }, 'balance notify failed'));
    await alarms.evaluate(b, s, t);
    return { ...b, id };
  }
  async function runOnce(plantId: number): Promise<Balance> {
    return compute(plantId, await settings.effective(plantId), now());
  }
  /**
   * The scheduled computation: whichever API process's worker takes the tick claims the plant's
   * interval first, and only the claim's winner computes and stores it. BullMQ hands each job to
   * one worker, but it may deliver an interval twice (a scheduler re-created by another process
   * starting, a stalled job retried elsewhere); the claim row makes that a no-op.
   */
  async function scheduled(plantId: number) {
    const s = await settings.effective(plantId);
    const t = now();
    const start = intervalStart(t, s['balance.interval_s']);
    const claim = await repo.claimInterval(plantId, new Date(start), name);
    if (!claim.won) {
      ctx.log.debug({ plantId, intervalStart: new Date(start).toISOString(), by: claim.by }, 'balance interval already claimed');
      return { skipped: 'claimed', intervalStart: new Date(start).toISOString(), by: claim.by };
    }
    const b = await compute(plantId, s, t);
    return { id: b.id, quality: b.quality, intervalStart: new Date(start).toISOString(), by: name };
  }
  const shiftSummary = async (plantId: number) => (mail ? mail.shiftSummary(plantId, new Date(now())) : false);

  let queue: SchedulingQueue | null = null;
  let worker: ClosableWorker | null = null;
  if (opts.schedule !== false) {
    const url = opts.databaseUrl ?? ctx.config.databaseUrl;
    if (!url && !ctx.config.redisUrl) throw new Error('balance engine: no database URL for the job queue');
    const backend = queueBackend(ctx, url ?? '');
    const q0 = backend.queue();
    queue = q0;
    const applied = new Map<string, string>();
    const sync = async () => {
      const q = q0;
      const ids = await repo.plantIds();
      const want = new Set<string>();
      for (const plantId of ids) {
        const s = await settings.effective(plantId);
        const plant = await repo.plant(plantId);
        const every = s['balance.interval_s'] * 1000;
        const bid = `balance:${plantId}`;
        const sid = `summary:${plantId}`;
        want.add(bid).add(sid);
        const bKey = String(every);
        if (applied.get(bid) !== bKey) {
          await q.upsertJobScheduler(bid, { every }, { name: 'balance', data: { plantId } });
          applied.set(bid, bKey);
        }
        const sKey = `${s['mail.summary_cron']}|${plant?.timezone ?? 'UTC'}`;
        if (applied.get(sid) !== sKey) {
          await q.upsertJobScheduler(sid, { pattern: s['mail.summary_cron'], tz: plant?.timezone ?? 'UTC' }, { name: 'shift-summary', data: { plantId } });
          applied.set(sid, sKey);
        }
      }
      await repo.pruneClaims(new Date(now() - CLAIM_KEEP_MS));
      for (const js of await q.getJobSchedulers()) {
        if (js.key.startsWith('balance:') || js.key.startsWith('summary:')) {
          if (!want.has(js.key)) {
            await q.removeJobScheduler(js.key);
            applied.delete(js.key);
          }
        }
      }
    };
    worker = backend.worker(async (job) => {
      if (job.name === 'sync') return sync();
      const plantId = Number(job.data.plantId);
      if (job.name === 'balance') {
        // A plant that never received a value has nothing to balance yet (a new plant, or the
        // demo while its history loads): no row of only 'unavailable' figures is stored.
        if ((await repo.lastReceived(plantId)) === null) return { skipped: 'no data yet' };
        try {
          return await scheduled(plantId);
        } catch (err) {
          if (err instanceof NotFoundError) return { skipped: 'plant gone' };
          throw err;
        }
      }
      if (job.name === 'shift-summary') return { sent: await shiftSummary(plantId) };
      throw new Error(`unknown job ${job.name}`);
    });
    worker.on('failed', (job, err) => ctx.log.warn({ err, job: job?.name, data: job?.data }, 'balance engine job failed'));
    worker.on('error', (err) => ctx.log.warn({ err }, 'balance engine worker error'));
    await sync();
    await q0.upsertJobScheduler('sync', { every: SYNC_EVERY_MS }, { name: 'sync', data: {} });
  }

  return {
    runOnce,
    shiftSummary,
    catcherUrl: catcher?.url ?? null,
    name,
    async stop() {
      await worker?.close();
      await queue?.close();
      mail?.close();
      await catcher?.close();
    },
  };
}
