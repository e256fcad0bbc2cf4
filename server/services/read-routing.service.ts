import { z } from 'zod';
import type { Clock } from '../app-context.ts';
import type { Principal } from '../auth/principal.ts';

/** Which database answered a read route; sent as the `x-flocstream-read` header. */
export type ReadSource = 'primary' | 'replica';
export const READ_SOURCE_HEADER = 'x-flocstream-read';
/** Where a write announces the fence it leaves, for every API process (NOTIFY payload: readFence). */
export const READ_FENCE_CHANNEL = 'flocstream_read_fence';

const LSN = /^[0-9A-F]{1,8}\/[0-9A-F]{1,8}$/i;
export const readFence = z.object({ userId: z.number().int().positive(), lsn: z.string().regex(LSN) }).strict();
export type ReadFence = z.infer<typeof readFence>;

/** A write-ahead log position (`pg_lsn` text, "hi/lo" in hexadecimal) as one number, for comparing. */
export function lsnValue(lsn: string): bigint {
  if (!LSN.test(lsn)) throw new Error(`not a WAL position: ${lsn}`);
  const [hi, lo] = lsn.split('/') as [string, string];
  return (BigInt(`0x${hi}`) << 32n) | BigInt(`0x${lo}`);
}

/** A fence is forgotten after this long even if the replica never showed it replayed [ms]. */
export const FENCE_MAX_AGE_MS = 5 * 60_000;
/** After the replica could not be reached, reads go to the primary for this long before it is tried again [ms]. */
export const REPLICA_RETRY_MS = 15_000;

/** Node's socket errors when a server cannot be reached or drops the connection. */
const SOCKET_CODES = new Set(['ECONNREFUSED', 'ECONNRESET', 'ETIMEDOUT', 'EHOSTUNREACH', 'ENETUNREACH', 'EPIPE', 'ENOTFOUND', 'EAI_AGAIN']);
/**
 * True when an error says the database could not be reached or went away, not that the query
 * was wrong: a socket error, SQLSTATE class 08 (connection exception), 57P01–57P03 (shut down,
 * crashed, not accepting connections yet; PostgreSQL manual, Appendix A "Error Codes"), or
 * node-postgres's own texts for a lost connection and a connect that timed out.
 */
export function databaseUnreachable(err: unknown): boolean {
  // The driver's error may come wrapped (drizzle's query error keeps it as `cause`).
  for (let e: unknown = err, depth = 0; e instanceof Error && depth < 5; e = e.cause, depth++) {
    const code = (e as { code?: unknown }).code;
    if (typeof code === 'string' && (SOCKET_CODES.has(code) || code.startsWith('08') || ['57P01', '57P02', '57P03'].includes(code))) return true;
    if (/Connection terminated|timeout exceeded when trying to connect/i.test(e.message)) return true;
  }
  return false;
}

export interface ReadRoutingDeps {
  /** False when no DATABASE_READ_URL is set: everything reads the primary. */
  hasReplica: boolean;
  /** `pg_current_wal_lsn()` on the primary: at or past the commit of every write already answered. */
  primaryLsn(): Promise<string>;
  /** `pg_last_wal_replay_lsn()` on the replica; null when it is not a standby or cannot say. */
  replayedLsn(): Promise<string | null>;
  /** Tells the other API processes (NOTIFY); this process records the fence itself. */
  announce(fence: ReadFence): Promise<void>;
  /** True while this process hears the others' announcements (its LISTEN connection is up). */
  listening(): boolean;
  clock: Clock;
}

/**
 * Read-your-writes over a streaming replica. The read routes answer from the replica unless
 * the caller has a write of its own that the replica may not show yet:
 *
 * - a write request (any non-GET by a signed-in user or token) counts as in flight from its
 *   start until, after its answer, the primary's current WAL position is recorded as the user's
 *   fence — so a read that arrives meanwhile, or right after, goes to the primary;
 * - a history import (and its balance recompute), which commits later in a job, records the
 *   fence of the user who uploaded it when its rows are committed, before the job shows done;
 * - a fence holds until the replica's replay position (`pg_last_wal_replay_lsn()`) reaches it
 *   (PostgreSQL manual, "Hot Standby" and the WAL position functions), then the user reads the
 *   replica again; fences are per user (sessions and tokens of one user share them) and are
 *   announced on NOTIFY to the other API processes. While this process does not hear those
 *   announcements every read goes to the primary, as the in-memory caches do;
 * - a replica that cannot be reached (down, restarting, network) costs no answer: the read is
 *   run again on the primary and reads stay there for REPLICA_RETRY_MS before the replica is
 *   tried again (`replicaFailed`, used by the composition's `reads.run`).
 */
export function createReadRouting(deps: ReadRoutingDeps) {
  const fences = new Map<number, { lsn: bigint; text: string; at: number }>();
  const inFlight = new Map<number, number>();
  /** Until when reads stay on the primary because the replica could not be reached (clock ms). */
  let replicaDownUntil = 0;

  function remember(f: ReadFence): void {
    const v = lsnValue(f.lsn);
    const had = fences.get(f.userId);
    if (!had || had.lsn < v) fences.set(f.userId, { lsn: v, text: f.lsn, at: deps.clock() });
  }

  async function fence(userId: number): Promise<void> {
    const f = { userId, lsn: await deps.primaryLsn() };
    remember(f);
    await deps.announce(f);
  }

  return {
    hasReplica: deps.hasReplica,

    /** Which database this caller's read goes to now. */
    async source(principal: Pick<Principal, 'userId'>): Promise<ReadSource> {
      if (!deps.hasReplica || !deps.listening() || deps.clock() < replicaDownUntil) return 'primary';
      if ((inFlight.get(principal.userId) ?? 0) > 0) return 'primary';
      const f = fences.get(principal.userId);
      if (!f) return 'replica';
      if (deps.clock() - f.at > FENCE_MAX_AGE_MS) {
        fences.delete(principal.userId);
        return 'replica';
      }
      const replayed = await deps.replayedLsn().catch(() => null);
      if (replayed === null || lsnValue(replayed) < f.lsn) return 'primary';
      if (fences.get(principal.userId) === f) fences.delete(principal.userId);
      return 'replica';
    },

    /** A write by this user starts; the returned call, after its answer, leaves the fence. */
    beginWrite(userId: number): () => Promise<void> {
      if (!deps.hasReplica) return async () => {};
      inFlight.set(userId, (inFlight.get(userId) ?? 0) + 1);
      let ended = false;
      return async () => {
        if (ended) return;
        ended = true;
        try {
          await fence(userId);
        } finally {
          const n = (inFlight.get(userId) ?? 1) - 1;
          if (n > 0) inFlight.set(userId, n);
          else inFlight.delete(userId);
        }
      };
    },

    /** A job committed rows on this user's behalf (a history import): their reads go to the primary until replayed. */
    async fenceUser(userId: number | null): Promise<void> {
      if (!deps.hasReplica || userId === null) return;
      await fence(userId);
    },

    /** Another API process's announcement. */
    remember,

    /** A read on the replica failed because it could not be reached: reads go to the primary for REPLICA_RETRY_MS. True when it was up until now. */
    replicaFailed(): boolean {
      const wasUp = deps.clock() >= replicaDownUntil;
      replicaDownUntil = deps.clock() + REPLICA_RETRY_MS;
      return wasUp;
    },
  };
}
export type ReadRouting = ReturnType<typeof createReadRouting>;
