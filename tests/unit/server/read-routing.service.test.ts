import { describe, expect, it } from 'vitest';
import { createReadRouting, databaseUnreachable, FENCE_MAX_AGE_MS, lsnValue, REPLICA_RETRY_MS, type ReadFence, type ReadRoutingDeps } from '../../../server/services/read-routing.service.ts';

/** A primary whose WAL position the test moves, a replica whose replay position it moves, an injected clock. */
function fakes(over: Partial<ReadRoutingDeps> = {}) {
  const state = { primary: '0/1000000', replayed: '0/1000000' as string | null, now: 1_000_000, listening: true, announced: [] as ReadFence[] };
  const deps: ReadRoutingDeps = {
    hasReplica: true,
    primaryLsn: async () => state.primary,
    replayedLsn: async () => state.replayed,
    announce: async (f) => void state.announced.push(f),
    listening: () => state.listening,
    clock: () => state.now,
    ...over,
  };
  return { state, routing: createReadRouting(deps) };
}

describe('read routing over a streaming replica', () => {
  it('compares WAL positions as the 64-bit numbers PostgreSQL prints as hi/lo hexadecimal (pg_lsn)', () => {
    // pg_lsn text is two 32-bit halves in hex (PostgreSQL manual, pg_lsn type): 1/0 = 2^32, past FFFFFFFF/… of the lower half.
    expect(lsnValue('0/16B3748')).toBe(0x16b3748n);
    expect(lsnValue('1/0')).toBe(4_294_967_296n);
    expect(lsnValue('1/0') > lsnValue('0/FFFFFFFF')).toBe(true);
    expect(() => lsnValue('16B3748')).toThrow(/not a WAL position/);
  });

  it('reads the replica with no write of its own, the primary during and after a write until the replica replayed it', async () => {
    const { state, routing } = fakes();
    expect(await routing.source({ userId: 7 })).toBe('replica');
    const end = routing.beginWrite(7);
    // In flight: the write may have committed already, the fence is not known yet.
    expect(await routing.source({ userId: 7 })).toBe('primary');
    state.primary = '0/2000000';
    await end();
    expect(state.announced).toEqual([{ userId: 7, lsn: '0/2000000' }]);
    expect(await routing.source({ userId: 7 })).toBe('primary');
    // Another user never waits for user 7's write.
    expect(await routing.source({ userId: 8 })).toBe('replica');
    state.replayed = '0/1FFFFFF';
    expect(await routing.source({ userId: 7 })).toBe('primary');
    state.replayed = '0/2000000';
    expect(await routing.source({ userId: 7 })).toBe('replica');
    // The fence is gone once passed: no replica query on the next read.
    state.replayed = null;
    expect(await routing.source({ userId: 7 })).toBe('replica');
  });

  it('a fence announced by another process holds here too; a later fence replaces an earlier one, never the reverse', async () => {
    const { state, routing } = fakes();
    routing.remember({ userId: 3, lsn: '0/3000000' });
    routing.remember({ userId: 3, lsn: '0/2000000' });
    state.replayed = '0/2800000';
    expect(await routing.source({ userId: 3 })).toBe('primary');
    state.replayed = '0/3000000';
    expect(await routing.source({ userId: 3 })).toBe('replica');
  });

  it('everything reads the primary without a replica, and while this process does not hear the others (LISTEN down)', async () => {
    const none = fakes({ hasReplica: false });
    expect(await none.routing.source({ userId: 1 })).toBe('primary');
    await none.routing.fenceUser(1);
    expect(none.state.announced).toEqual([]);
    const deaf = fakes();
    deaf.state.listening = false;
    expect(await deaf.routing.source({ userId: 1 })).toBe('primary');
  });

  it('a replica that cannot say its replay position (not a standby, unreachable) keeps a fenced user on the primary until the fence expires', async () => {
    const { state, routing } = fakes({ replayedLsn: async () => Promise.reject(new Error('connection refused')) });
    await routing.fenceUser(5);
    expect(await routing.source({ userId: 5 })).toBe('primary');
    state.now += FENCE_MAX_AGE_MS + 1;
    expect(await routing.source({ userId: 5 })).toBe('replica');
  });

  it('a replica that could not be reached sends every read to the primary for REPLICA_RETRY_MS, then is tried again', async () => {
    const { state, routing } = fakes();
    expect(routing.replicaFailed()).toBe(true); // it was up: the caller logs once
    expect(routing.replicaFailed()).toBe(false); // still down: no second log line
    expect(await routing.source({ userId: 3 })).toBe('primary');
    state.now += REPLICA_RETRY_MS - 1;
    expect(await routing.source({ userId: 3 })).toBe('primary');
    state.now += 1;
    expect(await routing.source({ userId: 3 })).toBe('replica');
  });

  it('tells an unreachable database from a failed query (SQLSTATE classes, PostgreSQL manual Appendix A)', () => {
    const withCode = (code: string, message = 'x') => Object.assign(new Error(message), { code });
    for (const e of [withCode('ECONNREFUSED'), withCode('ECONNRESET'), withCode('08006'), withCode('08001'), withCode('57P01'), withCode('57P03'), new Error('Connection terminated unexpectedly'), new Error('timeout exceeded when trying to connect'), new Error('Failed query: select …', { cause: withCode('57P01') })]) {
      expect(databaseUnreachable(e), e.message + ' ' + String((e as { code?: string }).code)).toBe(true);
    }
    // A query the replica refuses (a cancelled statement, a syntax error, a missing table) is the caller's answer, not a reason to switch.
    for (const e of [withCode('57014'), withCode('42601'), withCode('42P01'), new Error('no plant 9'), 'text']) expect(databaseUnreachable(e)).toBe(false);
  });
});
