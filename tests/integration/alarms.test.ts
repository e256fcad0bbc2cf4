import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startBalanceEngine, type BalanceEngine } from '../../server/jobs/balance-engine.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';
import { FIXTURE_VALUES, seedFixturePlant, writeSignals } from './balance-fixture.ts';

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

describe('alarms: raise, acknowledge, clear (ISA-18.2 on-delay and deadband)', () => {
  let h: TestApp;
  let engine: BalanceEngine;
  let plantId: number;
  let tagIds: Record<string, number>;
  const mlssAlarms = async () =>
    (await h.ctx.db.pool.query(`SELECT * FROM alarms WHERE plant_id = $1 AND rule = 'mlss-low' ORDER BY id`, [plantId])).rows;
  const mlss = async (v: number) => {
    await writeSignals(h.ctx, tagIds, { ...FIXTURE_VALUES, 'AIT-111': v }, { history_h: 1 });
    return engine.runOnce(plantId);
  };

  beforeAll(async () => {
    h = await createTestApp();
    ({ plantId, tagIds } = await seedFixturePlant(h.ctx));
    await h.ctx.db.pool.query(`INSERT INTO settings (plant_id, key, value) VALUES (0, 'alarm.on_delay_s', '1')`);
    engine = await startBalanceEngine(h.ctx, { schedule: false, mailCatcher: false });
  });
  afterAll(async () => {
    await engine?.stop();
    await h.close();
  });

  it('on-delay: a low MLSS raises only after it held for the delay', async () => {
    await mlss(1.9);
    expect(await mlssAlarms()).toHaveLength(0);
    await sleep(1100);
    await mlss(1.9);
    const [a] = await mlssAlarms();
    expect(a).toMatchObject({ state: 'raised', priority: 2, target: 'ab1', limit: 2 });
    expect(a.value).toBeCloseTo(1.9, 9);
    expect(a.message).toMatch(/MLSS in ab1 is 1.90 g\/L, below the floor of 2 g\/L.*licensed operator decides/);
  });

  it('deadband: back above the floor but within 0.1 g/L keeps the alarm', async () => {
    await mlss(2.05);
    expect((await mlssAlarms()).map((a) => a.state)).toEqual(['raised']);
  });

  it('acknowledge: operator+, who and when, audited; twice is a conflict; analyst refused', async () => {
    const [a] = await mlssAlarms();
    const url = `/api/v1/plants/${plantId}/alarms/${a.id}/ack`;
    expect((await (await h.agent('analyst')).post(url).send({})).status).toBe(403);
    const op = await h.agent('operator');
    const r = await op.post(url).send({ comment: 'sampling the basin' });
    expect(r.status).toBe(200);
    expect(r.body).toMatchObject({ id: a.id, state: 'acknowledged', acknowledgedBy: h.users.operator.id });
    expect(Date.parse(r.body.acknowledgedAt)).toBeGreaterThan(Date.now() - 10_000);
    const audit = await h.ctx.db.pool.query(`SELECT actor, target, details FROM audit_log WHERE action = 'alarm.acknowledge'`);
    expect(audit.rows).toEqual([{ actor: h.users.operator.email, target: `alarm:${a.id}`, details: expect.objectContaining({ rule: 'mlss-low', comment: 'sampling the basin' }) }]);
    expect((await op.post(url).send({})).status).toBe(409);
    expect((await op.post(`/api/v1/plants/${plantId}/alarms/999999/ack`).send({})).status).toBe(404);
  });

  it('clear: beyond the deadband the alarm returns to normal with the time', async () => {
    await mlss(2.2);
    const [a] = await mlssAlarms();
    expect(a.state).toBe('cleared');
    expect(a.cleared_at).toBeInstanceOf(Date);
    expect(a.acknowledged_by).toBe(h.users.operator.id);
  });

  it('chatter shorter than the on-delay raises nothing; a cleared unacknowledged alarm can still be acknowledged', async () => {
    await mlss(1.9);
    await mlss(2.2);
    await mlss(1.9);
    expect(await mlssAlarms()).toHaveLength(1);
    await sleep(1100);
    await mlss(1.9);
    await mlss(2.3);
    const rows = await mlssAlarms();
    expect(rows.map((r) => r.state)).toEqual(['cleared', 'cleared']);
    expect(rows[1].acknowledged_at).toBeNull();
    const r = await (await h.agent('operator')).post(`/api/v1/plants/${plantId}/alarms/${rows[1].id}/ack`).send({});
    expect(r.body).toMatchObject({ state: 'cleared', acknowledgedBy: h.users.operator.id });
  });

  it('a stale tag raises tag-stale (P4) for that tag only; fresh again clears it', async () => {
    await writeSignals(h.ctx, tagIds, FIXTURE_VALUES, { receivedAgo_s: { 'LIT-211': 400 }, history_h: 1 });
    await engine.runOnce(plantId);
    await sleep(1100);
    await engine.runOnce(plantId);
    const stale = (await h.ctx.db.pool.query(`SELECT target, priority, state FROM alarms WHERE plant_id = $1 AND rule = 'tag-stale'`, [plantId])).rows;
    expect(stale).toEqual([{ target: 'LIT-211', priority: 4, state: 'raised' }]);
    await writeSignals(h.ctx, tagIds, FIXTURE_VALUES, { history_h: 1 });
    await engine.runOnce(plantId);
    expect((await h.ctx.db.pool.query(`SELECT state FROM alarms WHERE plant_id = $1 AND rule = 'tag-stale'`, [plantId])).rows).toEqual([{ state: 'cleared' }]);
  });
});
