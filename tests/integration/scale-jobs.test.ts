import { randomBytes } from 'node:crypto';
import { Queue, createPostgresBackend } from 'bullmq';
import pino from 'pino';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { AppContext } from '../../server/app-context.ts';
import { loadConfig } from '../../server/config.ts';
import { openDatabase } from '../../server/db/client.ts';
import { BALANCE_QUEUE } from '../../server/jobs/balance-engine.ts';
import { HISTORY_QUEUE } from '../../server/jobs/history-jobs.ts';
import { startApiProcess, stopApiProcess, type ApiProcess } from '../helpers/api-process.ts';
import { createTestDatabase, type TestDatabase } from '../helpers/db.ts';
import { waitFor } from '../helpers/wait.ts';
import { seedFixturePlant, writeSignals } from './balance-fixture.ts';

/** The plants' balance interval for this test [s] (a per-plant setting; the default is 10 s). */
const INTERVAL_S = 2;

/**
 * Issue 18 item 4: the balance engine and the history jobs on two real API processes against
 * one database. Each process runs the engine's BullMQ worker on the PostgreSQL backend; each
 * plant's interval is claimed in `balance_claims` before it is computed. Expected (by the
 * design, no published figure applies): exactly one live balance per plant and interval, one
 * claim per stored balance, both processes among the claimants, and every extra delivery of an
 * interval answered "claimed" with the holder's name.
 */
describe('jobs on two API processes', () => {
  let t: TestDatabase;
  let ctx: AppContext;
  let a: ApiProcess | undefined;
  let b: ApiProcess | undefined;
  const plants: number[] = [];
  beforeAll(async () => {
    t = await createTestDatabase();
    const config = loadConfig({ DATABASE_URL: t.url, FLOCSTREAM_DEMO: '0' });
    ctx = { db: openDatabase(t.url), config, log: pino({ level: 'silent' }), sessionKey: randomBytes(32) };
    for (const code of ['sa', 'sb']) {
      const { plantId, tagIds } = await seedFixturePlant(ctx, { code });
      await writeSignals(ctx, tagIds, undefined, { history_h: 1 });
      await ctx.db.pool.query(`INSERT INTO settings (plant_id, key, value) VALUES ($1, 'balance.interval_s', $2)`, [plantId, JSON.stringify(INTERVAL_S)]);
      plants.push(plantId);
    }
    [a, b] = await Promise.all([startApiProcess({ DATABASE_URL: t.url }, { jobs: true }), startApiProcess({ DATABASE_URL: t.url }, { jobs: true })]);
  }, 120_000);
  afterAll(async () => {
    await Promise.all([stopApiProcess(a), stopApiProcess(b)]);
    await ctx?.db.close();
    await t?.drop();
  });

  it('one balance per plant and interval, computed by both processes; a second delivery of an interval is refused by its claim', async () => {
    const pids = [a!.child.pid, b!.child.pid].map(String);
    const claimants = async () =>
      (await ctx.db.pool.query<{ pid: string; n: number }>(`SELECT split_part(claimed_by, ':', 2) AS pid, count(*)::int AS n FROM balance_claims GROUP BY 1`)).rows;
    const perPlant = async () => (await ctx.db.pool.query<{ plant_id: number; n: number }>(`SELECT plant_id, count(*)::int AS n FROM balances WHERE NOT recomputed GROUP BY 1`)).rows;

    // Extra deliveries of plant 1's interval, as a scheduler re-created by a starting process or
    // a stalled job retried elsewhere would make: six jobs at once, through BullMQ's public add().
    const queue = new Queue(BALANCE_QUEUE, { connection: { connectionString: t.url, schema: 'bullmq', migrate: true, max: 1 } }, createPostgresBackend);
    try {
      await waitFor(perPlant, (rows) => rows.length === 2, { timeout_ms: 60_000, every_ms: 200, what: 'a first balance of each plant' });
      const extra = Array.from({ length: 6 }, (_, i) => `extra-${i}-${randomBytes(4).toString('hex')}`);
      await Promise.all(extra.map((jobId) => queue.add('balance', { plantId: plants[0] }, { jobId })));
      const results = await waitFor(
        async () => Promise.all(extra.map(async (id) => (await queue.getJob(id))?.returnvalue as { skipped?: string; by?: string | null; id?: number } | null | undefined)),
        (r) => r.every((x) => x !== null && x !== undefined),
        { timeout_ms: 60_000, every_ms: 100, what: 'the extra jobs to finish' },
      );
      // Six deliveries within a few seconds fall into at most a few 2 s intervals: most find the interval taken.
      const refused = results.filter((r) => r!.skipped === 'claimed');
      expect(refused.length).toBeGreaterThanOrEqual(1);
      for (const r of refused) expect(pids).toContain(r!.by!.split(':')[1]);

      // Several intervals with both processes doing some of the work.
      await waitFor(perPlant, (rows) => rows.length === 2 && rows.every((r) => r.n >= 6), { timeout_ms: 90_000, every_ms: 200, what: 'six balances of each plant' });
      const who = await waitFor(claimants, (rows) => pids.every((p) => rows.some((r) => r.pid === p)), { timeout_ms: 60_000, every_ms: 200, what: 'claims by both API processes' });
      expect(who.map((r) => r.pid).sort()).toEqual([...pids].sort());
    } finally {
      await queue.close();
    }
    await Promise.all([stopApiProcess(a), stopApiProcess(b)]);
    a = b = undefined;

    // Exactly one live balance per plant and interval (intervals on the Unix epoch, as claimed).
    const dup = await ctx.db.pool.query(
      `SELECT plant_id, floor(extract(epoch FROM ts) / $1) AS slot, count(*)::int AS n FROM balances WHERE NOT recomputed GROUP BY 1, 2 HAVING count(*) > 1`,
      [INTERVAL_S],
    );
    expect(dup.rows).toEqual([]);
    // Every stored balance lies in an interval its plant's claim names, and every claim stored one balance.
    const unclaimed = await ctx.db.pool.query(
      `SELECT b.id FROM balances b LEFT JOIN balance_claims c ON c.plant_id = b.plant_id AND c.interval_start = to_timestamp(floor(extract(epoch FROM b.ts) / $1) * $1)
        WHERE NOT b.recomputed AND c.plant_id IS NULL`,
      [INTERVAL_S],
    );
    expect(unclaimed.rows).toEqual([]);
    const counts = await ctx.db.pool.query<{ balances: number; claims: number }>(
      `SELECT (SELECT count(*)::int FROM balances WHERE NOT recomputed) AS balances, (SELECT count(*)::int FROM balance_claims) AS claims`,
    );
    expect(counts.rows[0]!.balances).toBe(counts.rows[0]!.claims);
  }, 240_000);

  it('a history job delivered twice runs once', async () => {
    a = await startApiProcess({ DATABASE_URL: t.url }, { jobs: true });
    b = await startApiProcess({ DATABASE_URL: t.url }, { jobs: true });
    const plantId = plants[0]!;
    const now = Date.now();
    const row = await ctx.db.pool.query<{ id: number }>(`INSERT INTO history_jobs (plant_id, kind, options) VALUES ($1, 'recompute', $2) RETURNING id`, [
      plantId,
      JSON.stringify({ from: new Date(now - 3_600_000).toISOString(), to: new Date(now - 1_800_000).toISOString(), balanceStep_s: 600 }),
    ]);
    const id = row.rows[0]!.id;
    const queue = new Queue(HISTORY_QUEUE, { connection: { connectionString: t.url, schema: 'bullmq', migrate: true, max: 1 } }, createPostgresBackend);
    try {
      // Two jobs for one row (as two processes re-queueing an unfinished recompute at their start would).
      const ids = [`recompute-${id}-x`, `recompute-${id}-y`];
      await Promise.all(ids.map((jobId) => queue.add('recompute', { id }, { jobId })));
      const done = await waitFor(
        async () => Promise.all(ids.map(async (j) => (await queue.getJob(j))?.finishedOn ?? null)),
        (r) => r.every((x) => x !== null),
        { timeout_ms: 60_000, every_ms: 100, what: 'both history jobs to finish' },
      );
      expect(done).toHaveLength(2);
      const values = await Promise.all(ids.map(async (j) => (await queue.getJob(j))?.returnvalue as { skipped?: string } | undefined));
      expect(values.filter((v) => v?.skipped === 'claimed')).toHaveLength(1);
      const job = await ctx.db.pool.query(`SELECT state, run_token FROM history_jobs WHERE id = $1`, [id]);
      expect(job.rows[0].state).toBe('done');
      expect(ids).toContain(job.rows[0].run_token);
      // Window 30 min at a 600 s step: the recompute's grid t0 = ceil((from + 60 s) / 600 s) × 600 s up to `to + step`; computed once, so no time twice.
      const twice = await ctx.db.pool.query(`SELECT ts FROM balances WHERE plant_id = $1 AND recomputed GROUP BY ts HAVING count(*) > 1`, [plantId]);
      expect(twice.rows).toEqual([]);
      const n = await ctx.db.pool.query<{ n: number }>(`SELECT count(*)::int AS n FROM balances WHERE plant_id = $1 AND recomputed`, [plantId]);
      expect(n.rows[0]!.n).toBeGreaterThan(0);
    } finally {
      await queue.close();
    }
  }, 180_000);
});
