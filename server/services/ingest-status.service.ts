import { INGEST_HEARTBEAT_PERIODS, INGEST_WORKER_SHOWN_PERIODS, ingestWorkerStatus, type IngestStatusOut, type IngestWorkerOut, type IngestWorkerStatus } from '../../shared/contracts/wiring.ts';
import type { Clock } from '../app-context.ts';
import type { Principal } from '../auth/principal.ts';
import type { IngestRepository, IngestWorkerRow } from '../repositories/ingest.repository.ts';
import type { WiringRepository } from '../repositories/wiring.repository.ts';
import type { SpoolWorkerView } from './alarm.service.ts';

const HOUR_MS = 3_600_000;

export interface IngestStatusDeps {
  ingest: Pick<IngestRepository, 'workers'>;
  wiring: Pick<WiringRepository, 'deadLetterCounts' | 'sourcePlants'>;
  clock: Clock;
}

/** A worker runs while its heartbeat is younger than three of its periods and it has not stopped. */
export function workerRunning(w: Pick<IngestWorkerRow, 'heartbeatAge_s' | 'heartbeat_ms' | 'stoppedAt'>): boolean {
  return w.stoppedAt === null && w.heartbeatAge_s * 1000 < INGEST_HEARTBEAT_PERIODS * w.heartbeat_ms;
}

/**
 * The ingest workers' health as the API reports it, from the `ingest_workers` rows each worker
 * rewrites with its heartbeat (on any host), plus dead-letter counts. Ingest is `running` while
 * at least one worker is; the top-level figures keep the single-process contract (the worker
 * with the latest heartbeat; rates summed and lags the worst over running workers) and
 * `workers` lists each. A plant-scoped principal sees only the sources (and dead letters) of
 * its plants.
 */
export function createIngestStatusService(deps: IngestStatusDeps) {
  return {
    async status(principal: Pick<Principal, 'plantIds'> | undefined): Promise<IngestStatusOut> {
      const scope = principal?.plantIds ?? null;
      const [deadLetters, rows] = await Promise.all([deps.wiring.deadLetterCounts(new Date(deps.clock() - HOUR_MS), scope), deps.ingest.workers()]);
      const workers = rows.map((w) => ({ row: w, running: workerRunning(w), status: readStatus(w.status) }));
      if (scope) {
        const plantOf = await deps.wiring.sourcePlants([...new Set(workers.flatMap((w) => w.status?.sources.map((s) => s.sourceId) ?? []))]);
        for (const w of workers) if (w.status) w.status = { ...w.status, sources: w.status.sources.filter((s) => scope.includes(plantOf.get(s.sourceId) ?? -1)) };
      }
      // A stopped or silent worker is shown stale for a while, then left out (its row stays a day).
      const shownWorkers = workers.filter((w) => w.running || w.row.heartbeatAge_s * 1000 < INGEST_WORKER_SHOWN_PERIODS * w.row.heartbeat_ms);
      const out: IngestWorkerOut[] = shownWorkers.map(({ row, running, status }) => ({
        id: row.id,
        host: row.host,
        pid: row.pid,
        startedAt: row.startedAt.toISOString(),
        heartbeatAt: row.heartbeatAt.toISOString(),
        heartbeatAge_s: row.heartbeatAge_s,
        heartbeat_ms: row.heartbeat_ms,
        running,
        stoppedAt: row.stoppedAt?.toISOString() ?? null,
        samplesPerSec: status?.samplesPerSec ?? null,
        lagMs: status?.lagMs ?? null,
        spool: status?.spool ?? null,
        sourceIds: status?.sources.map((s) => s.sourceId) ?? [],
        sources: status?.sources.length ?? 0,
        messages: status?.sources.reduce((a, s) => a + s.messages, 0) ?? 0,
        samples: status?.sources.reduce((a, s) => a + s.samples, 0) ?? 0,
        loadError: status?.loadError ?? null,
      }));
      const latest = workers[0];
      if (!latest) {
        return {
          running: false,
          reason: 'no ingest worker has written a heartbeat in the last day: the ingest process is not running or has not started yet',
          heartbeatAt: null,
          heartbeatAge_s: null,
          pid: null,
          startedAt: null,
          samplesPerSec: null,
          lagMs: null,
          spool: null,
          writer: null,
          loadError: null,
          sources: [],
          deadLetters,
          workers: [],
        };
      }
      const live = workers.filter((w) => w.running);
      const shown = live.length ? live : [latest];
      const statuses = shown.map((w) => w.status).filter((s): s is IngestWorkerStatus => s !== null);
      const sum = (f: (s: IngestWorkerStatus) => number) => statuses.reduce((a, s) => a + f(s), 0);
      const r = latest.row;
      return {
        running: live.length > 0,
        ...(live.length ? {} : { reason: notRunningReason(latest.row, latest.status) }),
        heartbeatAt: r.heartbeatAt.toISOString(),
        heartbeatAge_s: r.heartbeatAge_s,
        pid: r.pid,
        startedAt: r.startedAt.toISOString(),
        samplesPerSec: statuses.length ? sum((s) => s.samplesPerSec) : null,
        lagMs: statuses.length ? Math.max(...statuses.map((s) => s.lagMs)) : null,
        spool: statuses.length ? { bytes: sum((s) => s.spool.bytes), files: sum((s) => s.spool.files), unreadable: statuses.flatMap((s) => s.spool.unreadable), capReached: statuses.some((s) => s.spool.capReached) } : null,
        writer: latest.status?.writer ?? null,
        loadError: statuses.find((s) => s.loadError)?.loadError ?? null,
        sources: statuses.flatMap((s) => s.sources),
        deadLetters,
        workers: out,
      };
    },
  };
}

/** Each worker's spool for the `ingest-spool` alarms (alarm.service.ts spoolAlarmConditions), in the rows' order. */
export function workerSpools(rows: readonly IngestWorkerRow[]): SpoolWorkerView[] {
  return rows.map((w) => ({ host: w.host, running: workerRunning(w), spool: readStatus(w.status)?.spool ?? null }));
}

function readStatus(json: unknown): IngestWorkerStatus | null {
  const r = ingestWorkerStatus.safeParse(json);
  return r.success ? r.data : null;
}

function notRunningReason(w: IngestWorkerRow, status: IngestWorkerStatus | null): string {
  const unread = status ? '' : ' (its status could not be read: a different ingest version?)';
  if (w.stoppedAt) return `ingest stopped at ${w.stoppedAt.toISOString()} (worker ${w.id} on ${w.host}); the figures below are its last${unread}`;
  const limit_s = (INGEST_HEARTBEAT_PERIODS * w.heartbeat_ms) / 1000;
  return `the last ingest heartbeat is ${Math.round(w.heartbeatAge_s)} s old (more than ${INGEST_HEARTBEAT_PERIODS} periods, ${limit_s} s): ingest has stopped or is stuck; the figures below are its last${unread}`;
}
