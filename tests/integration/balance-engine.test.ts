import { Queue, createPostgresBackend } from 'bullmq';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { BALANCE_QUEUE, startBalanceEngine, type BalanceEngine } from '../../server/jobs/balance-engine.ts';
import { balanceOut } from '../../shared/contracts/balance.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';
import { waitFor } from '../helpers/wait.ts';
import { seedFixturePlant, writeSignals } from './balance-fixture.ts';

describe('balance engine against PostgreSQL', () => {
  let h: TestApp;
  let engine: BalanceEngine;
  let plantId: number;
  let tagIds: Record<string, number>;
  beforeAll(async () => {
    h = await createTestApp();
    ({ plantId, tagIds } = await seedFixturePlant(h.ctx));
    engine = await startBalanceEngine(h.ctx, { schedule: false, mailCatcher: false });
  });
  afterAll(async () => {
    await engine?.stop();
    await h.close();
  });

  it('a balance from fixture signals matches the hand computation, is stored and published', async () => {
    await writeSignals(h.ctx, tagIds);
    const listener = new pg.Client({ connectionString: h.t.url });
    await listener.connect();
    const got: string[] = [];
    listener.on('notification', (m) => got.push(m.payload ?? ''));
    await listener.query('LISTEN flocstream_stream');
    const b = await engine.runOnce(plantId);
    // Numbers: tests/unit/domain/balance-assemble.test.ts (design §3 formulas on the fixture values).
    expect(b.data.inventory.totalMass_kg.value).toBeCloseTo(30_000, 6);
    expect(b.data.inventory.storedFraction.value).toBeCloseTo(0.4, 9);
    // On the lower X_R,max: flux theory G_L/u = 9.907676 g/L below the rule's 10 g/L (balance-assemble.test.ts).
    expect(b.data.trains[0]!.ras.concentrationMargin.value).toBeCloseTo(1 - 7 / 9.907675696771152, 9);
    expect(b.data.trains[0]!.ras.pumpMargin.value).toBeCloseTo(1 - (800 * 3) / (9.907675696771152 - 3) / 850, 6);
    expect(b.data.trains[0]!.storm.equilibriumMlss_gL.value).toBeCloseTo(2.727272727, 6);
    expect(b.data.srt.total_d.value).toBeCloseTo(7.44934, 3);
    expect(b.data.srt.wasAdvice_m3h.value).toBeCloseTo(14.65, 6);
    expect(b.data.clarifiers[0]!.integratedMass_kg.value).toBeCloseTo(11_232.2, 2);
    expect(b.quality).toBe('good');
    const row = await h.ctx.db.pool.query('SELECT id, plant_id, quality, data, inputs FROM balances WHERE id = $1', [b.id]);
    expect(row.rows[0]).toMatchObject({ plant_id: plantId, quality: 'good' });
    expect(balanceOut.safeParse({ ...b, data: row.rows[0].data, inputs: row.rows[0].inputs }).success).toBe(true);
    expect(row.rows[0].inputs.signals.find((s: { tag: string }) => s.tag === 'AIT-231')).toMatchObject({ value: 0.01, unit: 'g/L', quality: 'good' });
    const published = await waitFor(() => got.find((g) => g.includes('"balance"')), undefined, { what: 'the balance notification' });
    await listener.end();
    const msg = JSON.parse(published);
    expect(msg).toMatchObject({ plantId, event: 'balance', data: { id: b.id, quality: 'good' } });
    expect(msg.data.totalMass_kg.value).toBeCloseTo(30_000, 6);
  });

  it('a stale input makes figures estimated, a missing SVI makes the RAS limit unavailable, with reasons', async () => {
    await writeSignals(h.ctx, tagIds, undefined, { receivedAgo_s: { 'AIT-111': 100 } });
    const stale = await engine.runOnce(plantId);
    expect(stale.data.basins[0]!.mass_kg).toMatchObject({ value: 18_000, quality: 'estimated' });
    expect(stale.data.basins[0]!.mass_kg.reasons.join()).toMatch(/AIT-111: stale/);
    expect(stale.quality).toBe('estimated');
    await h.ctx.db.pool.query('DELETE FROM lab_results WHERE plant_id = $1', [plantId]);
    await writeSignals(h.ctx, tagIds);
    const noSvi = await engine.runOnce(plantId);
    expect(noSvi.data.trains[0]!.ras.concentrationMargin).toMatchObject({ value: null, quality: 'unavailable' });
    expect(noSvi.data.trains[0]!.ras.concentrationMargin.reasons.join()).toMatch(/no SVI or DSVI/);
    expect(noSvi.data.inventory.totalMass_kg.quality).toBe('good');
    await h.ctx.db.pool.query(`INSERT INTO lab_results (plant_id, kind, value, unit, sampled_at) VALUES ($1, 'SVI', 120, 'mL/g', now())`, [plantId]);
  });

  it('an unknown plant is a not-found error, not a balance of zeros', async () => {
    await expect(engine.runOnce(999_999)).rejects.toThrow(/no plant/);
  });

  it('the repeatable job (BullMQ on PostgreSQL) computes balances by itself and stops cleanly', async () => {
    await h.ctx.db.pool.query(`INSERT INTO settings (plant_id, key, value) VALUES ($1, 'balance.interval_s', '1')`, [plantId]);
    const count = async (): Promise<number> => (await h.ctx.db.pool.query('SELECT count(*)::int n FROM balances WHERE plant_id = $1', [plantId])).rows[0].n;
    // BullMQ's own view of the queue's workers (on PostgreSQL: the named LISTEN connections).
    const observer = new Queue(BALANCE_QUEUE, { connection: { connectionString: h.t.url, schema: 'bullmq', migrate: true, max: 1 } }, createPostgresBackend);
    const workers = async () => (await observer.getWorkers()).length;
    try {
      const before = await count();
      const scheduled = await startBalanceEngine(h.ctx, { mailCatcher: false });
      try {
        await waitFor(count, (n) => n >= before + 2, { timeout_ms: 15_000, every_ms: 100, what: 'two scheduled balances' });
        const sched = await h.ctx.db.pool.query(`SELECT count(*)::int n FROM pg_namespace WHERE nspname = 'bullmq'`);
        expect(sched.rows[0].n).toBe(1);
        expect(await workers()).toBe(1);
      } finally {
        await scheduled.stop();
      }
      // Stopped cleanly: stop() waited for a job in flight, and the worker has left the queue,
      // so nothing computes another balance (no wait for a next tick that must not come).
      const after = await count();
      await waitFor(workers, (n) => n === 0, { what: 'the worker leaving the queue' });
      expect(await count()).toBe(after);
    } finally {
      await observer.close();
    }
  });
});
