import path from 'node:path';
import { credentialChanged, type AuthChange } from './auth/credential-cache.ts';
import type { Logger } from 'pino';
import type { Config } from './config.ts';
import type { Database } from './db/client.ts';
import { dummyPasswordHash, hashPassword, randomPassword, verifyPassword } from './auth/passwords.ts';
import { outboxReader } from './mail/outbox.ts';
import { newSessionId, SESSION_TTL_S, signSession } from './auth/session.ts';
import { alarmRepository } from './repositories/alarm.repository.ts';
import { auditRepository } from './repositories/audit.repository.ts';
import { balanceRepository } from './repositories/balance.repository.ts';
import { notificationRepository } from './repositories/notification.repository.ts';
import { plantModelRepository } from './repositories/plant-model.repository.ts';
import { streamRepository } from './repositories/stream.repository.ts';
import { wiringRepository } from './repositories/wiring.repository.ts';
import { ingestRepository } from './repositories/ingest.repository.ts';
import { labRepository } from './repositories/lab.repository.ts';
import { historyRepository } from './repositories/history.repository.ts';
import { enqueueHistoryJob } from './jobs/history-queue.ts';
import { createHistoryImportService } from './services/history-import.service.ts';
import { plantRepository } from './repositories/plant.repository.ts';
import { seriesRepository } from './repositories/series.repository.ts';
import { settingsRepository } from './repositories/settings.repository.ts';
import { sessionRepository, tokenRepository, userRepository } from './repositories/user.repository.ts';
import { createAlarmService } from './services/alarm.service.ts';
import { createAuditLog } from './services/audit.service.ts';
import { createStreamService, streamHub } from './services/stream.service.ts';
import { createAuthService } from './services/auth.service.ts';
import { createCalcService } from './services/calc.service.ts';
import { createWorkerPool } from './workers/worker-pool.ts';
import { createBootstrapService } from './services/bootstrap.service.ts';
import { createIngestStatusService } from './services/ingest-status.service.ts';
import { createOutboxService } from './services/outbox.service.ts';
import { createPlantConfigService } from './services/plant-config.service.ts';
import { createPlantModelService } from './services/plant-model.service.ts';
import { createLabService } from './services/lab.service.ts';
import { createPlantAccess, createPlantService } from './services/plant.service.ts';
import { createSeriesService } from './services/series.service.ts';
import { createSettingsService } from './services/settings.service.ts';
import { createTokenService } from './services/token.service.ts';
import { createUserService } from './services/user.service.ts';
import { createOpcuaBrowseService } from './services/opcua-browse.service.ts';
import { createWiringService } from './services/wiring.service.ts';
import { createCursorCodec, type CursorCodec } from './http/csv.ts';
import { replicationRepository } from './repositories/replication.repository.ts';
import { createReadRouting, databaseUnreachable, READ_FENCE_CHANNEL, readFence, REPLICA_RETRY_MS, type ReadSource } from './services/read-routing.service.ts';
import type { Principal } from './auth/principal.ts';
import type { AuditLog } from './services/audit.service.ts';

/** What every route module gets: passed in, never imported as a global. */
export interface AppContext {
  db: Database;
  /** The streaming replica of DATABASE_READ_URL, for the read routes (absent: they read `db`). */
  readDb?: Database;
  config: Config;
  log: Logger;
  /** Secret that signs session JWTs (HS256). */
  sessionKey: Uint8Array;
}

/** Largest historian file accepted [bytes]: 4 GiB, well above a year of a plant's tags at 10 s. */
const HISTORY_MAX_BYTES = 4 * 1024 ** 3;

/** Wall clock in epoch ms; services take it as a dependency so a test can set the time. */
export type Clock = () => number;
export const systemClock: Clock = () => Date.now();

/**
 * The services behind the read routes (samples, balance history, lab results, CSV exports),
 * built on one database handle: the primary's, or the replica's. Only the handle differs.
 */
function readServices(database: Database, clock: Clock, audit: AuditLog, cursors: CursorCodec) {
  const plantRepo = plantRepository(database.db, database.pool);
  const plantAccess = createPlantAccess({ plantRepo });
  return {
    plantAccess,
    plants: createPlantService({ plantRepo, plantAccess, clock, cursors }),
    series: createSeriesService({ seriesRepo: seriesRepository(database.pool), plantRepo, plantAccess, clock, cursors }),
    lab: createLabService({ labRepo: labRepository(database.db), plantAccess, audit, cursors }),
  };
}
export type ReadServices = ReturnType<typeof readServices>;

/**
 * The composition root: every repository built once on the context's database, every service
 * built once from the repositories and services it names (nothing else), for the life of the
 * context. Routes, jobs and scripts take their services from here; a unit test builds a
 * service with its own fakes instead (tests/unit/server/*.service.test.ts).
 */
function compose(ctx: AppContext) {
  const { db, pool } = ctx.db;
  const clock = systemClock;
  const repos = {
    audit: auditRepository(db),
    users: userRepository(db),
    tokens: tokenRepository(db),
    sessions: sessionRepository(db),
    plants: plantRepository(db, pool),
    settings: settingsRepository(db),
    series: seriesRepository(pool),
    lab: labRepository(db),
    wiring: wiringRepository(db),
    ingest: ingestRepository(db),
    alarms: alarmRepository(db),
    stream: streamRepository(pool),
    balance: balanceRepository(ctx.db),
    notifications: notificationRepository(db),
    plantModel: plantModelRepository(db),
    outbox: outboxReader(db),
    history: historyRepository(ctx.db),
  };
  const audit = createAuditLog({ auditRepo: repos.audit });
  // Paging cursors under a key derived from the session secret every API process shares.
  const cursors = createCursorCodec(ctx.sessionKey);
  const plantAccess = createPlantAccess({ plantRepo: repos.plants });
  const credentialsChanged = (c: AuthChange) => credentialChanged(ctx, c);
  const services = {
    audit,
    auth: createAuthService({
      userRepo: repos.users,
      sessionRepo: repos.sessions,
      audit,
      clock,
      passwords: { verify: verifyPassword, dummyHash: dummyPasswordHash },
      newSessionId,
      signSession: (userId, sessionId) => signSession(ctx.sessionKey, userId, sessionId),
      sessionTtl_s: SESSION_TTL_S,
      credentialsChanged,
    }),
    bootstrap: createBootstrapService({
      userRepo: repos.users,
      audit,
      passwords: { hash: hashPassword, random: randomPassword },
      admin: { email: ctx.config.adminEmail, password: ctx.config.adminPassword },
    }),
    users: createUserService({ userRepo: repos.users, sessionRepo: repos.sessions, audit, hashPassword, credentialsChanged }),
    tokens: createTokenService({ tokenRepo: repos.tokens, audit, clock, credentialsChanged }),
    settings: createSettingsService({ settingsRepo: repos.settings, plantRepo: repos.plants, audit }),
    plantAccess,
    plantModel: createPlantModelService({ modelRepo: repos.plantModel, clock }),
    plantConfig: createPlantConfigService({ modelRepo: repos.plantModel, clock }),
    ingestStatus: createIngestStatusService({ ingest: repos.ingest, wiring: repos.wiring, clock }),
    outbox: createOutboxService({ outbox: repos.outbox }),
    plants: createPlantService({ plantRepo: repos.plants, plantAccess, clock, cursors }),
    series: createSeriesService({ seriesRepo: repos.series, plantRepo: repos.plants, plantAccess, clock, cursors }),
    lab: createLabService({ labRepo: repos.lab, plantAccess, audit, cursors }),
    stream: createStreamService({ hub: streamHub(ctx), plantAccess }),
    alarms: createAlarmService({
      alarmRepo: repos.alarms,
      audit,
      clock,
      changed: (a, change) => repos.stream.notify(a.plantId, 'alarm', { change, alarm: a }).catch((err) => ctx.log.warn({ err }, 'alarm notify failed')),
    }),
    historyImport: createHistoryImportService({
      historyRepo: repos.history,
      plantAccess,
      audit,
      uploadDir: path.join(ctx.config.dataDir, 'imports'),
      maxBytes: HISTORY_MAX_BYTES,
      enqueue: (kind, id) => enqueueHistoryJob(ctx, kind, id),
    }),
    calc: createCalcService({
      pool: createWorkerPool({ entry: new URL('./workers/calc.worker.ts', import.meta.url), size: ctx.config.calc.workers, queue: ctx.config.calc.queue, timeout_ms: ctx.config.calc.timeout_ms, prestart: true }),
      limits: { budget_ms: ctx.config.calc.budget_ms, timeout_ms: ctx.config.calc.timeout_ms, settlerMaxSteps: ctx.config.calc.settlerMaxSteps },
    }),
    wiring: createWiringService({ wiringRepo: repos.wiring, plantAccess, audit, log: ctx.log, ingestRepo: repos.ingest, opcua: createOpcuaBrowseService({ pool: ctx.db.pool, dataDir: ctx.config.dataDir }) }),
  };
  // Read routes: the replica's services when DATABASE_READ_URL is set, chosen per request by
  // the read routing (read-your-writes), else the primary's.
  const replication = replicationRepository(pool, ctx.readDb?.pool ?? null);
  const listener = ctx.readDb ? ctx.db.listener(ctx.log) : null;
  const routing = createReadRouting({
    hasReplica: Boolean(ctx.readDb),
    primaryLsn: replication.primaryLsn,
    replayedLsn: replication.replayedLsn,
    announce: replication.announce,
    listening: () => listener?.up ?? false,
    clock,
  });
  listener?.on(READ_FENCE_CHANNEL, (payload) => {
    let r;
    try {
      r = readFence.safeParse(JSON.parse(payload));
    } catch {
      r = null;
    }
    if (r?.success) routing.remember(r.data);
    else ctx.log.warn({ payload: payload.slice(0, 200) }, `${READ_FENCE_CHANNEL}: unreadable payload ignored`);
  });
  const onPrimary: ReadServices & { source: ReadSource } = { plantAccess, plants: services.plants, series: services.series, lab: services.lab, source: 'primary' };
  const onReplica: typeof onPrimary | null = ctx.readDb ? { ...readServices(ctx.readDb, clock, audit, cursors), source: 'replica' } : null;
  const reads = {
    routing,
    /** The primary's read services (what every route reads without a replica). */
    primary: onPrimary,
    /** The services a read route of this caller uses now, and which database they read (`source`). */
    async pick(principal: Pick<Principal, 'userId'>): Promise<ReadServices & { source: ReadSource }> {
      if (!onReplica) return onPrimary;
      return (await routing.source(principal)) === 'replica' ? onReplica : onPrimary;
    },
    /**
     * Runs one read on the services `pick` gives; a replica that cannot be reached is no failed
     * answer: the read runs again on the primary (reads are side-effect free) and the routing
     * keeps reads there for a while. Says which database answered.
     */
    async run<T>(principal: Pick<Principal, 'userId'>, read: (r: ReadServices) => Promise<T>): Promise<{ out: T; source: ReadSource }> {
      const r = await reads.pick(principal);
      try {
        return { out: await read(r), source: r.source };
      } catch (err) {
        if (r.source !== 'replica' || !databaseUnreachable(err)) throw err;
        if (routing.replicaFailed()) ctx.log.warn({ err: (err as Error).message }, `the read replica cannot be reached; reads go to the primary, the replica is tried again in ${REPLICA_RETRY_MS / 1000} s`);
        return { out: await read(onPrimary), source: 'primary' };
      }
    },
  };
  return { repos, services: { ...services, reads }, clock };
}
export type Composition = ReturnType<typeof compose>;

const composed = new WeakMap<AppContext, Composition>();
function composition(ctx: AppContext): Composition {
  let c = composed.get(ctx);
  if (!c) composed.set(ctx, (c = compose(ctx)));
  return c;
}

/** The services of this context, wired once. */
export function services(ctx: AppContext): Composition['services'] {
  return composition(ctx).services;
}

/** The repositories of this context (for jobs that build a service with hooks of their own). */
export function repositories(ctx: AppContext): Composition['repos'] {
  return composition(ctx).repos;
}
