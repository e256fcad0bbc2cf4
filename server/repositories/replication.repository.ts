import type pg from 'pg';
import { READ_FENCE_CHANNEL, type ReadFence } from '../services/read-routing.service.ts';

/**
 * WAL positions of the primary and of its streaming replica, and the fence announcement
 * (server/services/read-routing.service.ts). `replica` is null when no DATABASE_READ_URL is set.
 */
export function replicationRepository(primary: pg.Pool, replica: pg.Pool | null) {
  return {
    async primaryLsn(): Promise<string> {
      const r = await primary.query<{ lsn: string }>('SELECT pg_current_wal_lsn()::text AS lsn');
      return r.rows[0]!.lsn;
    },
    /** Null on a server that is not in recovery (not a standby), where the function answers NULL. */
    async replayedLsn(): Promise<string | null> {
      if (!replica) return null;
      const r = await replica.query<{ lsn: string | null }>('SELECT pg_last_wal_replay_lsn()::text AS lsn');
      return r.rows[0]?.lsn ?? null;
    },
    async announce(fence: ReadFence): Promise<void> {
      await primary.query('SELECT pg_notify($1, $2)', [READ_FENCE_CHANNEL, JSON.stringify(fence)]);
    },
  };
}
