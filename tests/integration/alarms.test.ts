import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startBalanceEngine } from '../../server/jobs/balance-engine.ts';
import { SETTINGS } from '../../shared/contracts/settings.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';
import { FIXTURE_VALUES, seedFixturePlant, writeSignals } from './balance-fixture.ts';

/**
 * Alarm life cycle in ISA-18.2 terms (ANSI/ISA-18.2-2016: on-delay, deadband, acknowledge).
 * Time is the engine's injected clock, moved by the test; every test seeds its own plant and
 * runs its own engine, so the tests share only the database and its users and pass in any order.
 */
const ON_DELAY_S = SETTINGS['alarm.on_delay_s'].default;

describe('alarms: raise, acknowledge, clear (ISA-18.2 on-delay and deadband)', () => {
  let h: TestApp;
  let plants = 0;
  const stops: Array<() => Promise<void>> = [];

  beforeAll(async () => {
    h = await createTestApp();
  });
  afterAll(async () => {
    for (const s of stops) await s();
    await h.close();
  });

  /** A fresh fixture plant with its own engine on a clock that moves only when told. */
  async function plant() {
    const { plantId, tagIds } = await seedFixturePlant(h.ctx, { code: `al${++plants}` });
    let now_ms = Math.floor(Date.now() / 1000) * 1000;
    const engine = await startBalanceEngine(h.ctx, { schedule: false, mailCatcher: false, now: () => now_ms });
    stops.push(() => engine.stop());
    const alarms = async (rule: string) =>
      (await h.ctx.db.pool.query(`SELECT * FROM alarms WHERE plant_id = $1 AND rule = $2 ORDER BY id`, [plantId, rule])).rows;
    return {
      plantId,
      tagIds,
      /** Moves the clock on by `s` seconds. */
      advance(s: number) {
        now_ms += s * 1000;
      },
      at: () => new Date(now_ms),
      /** Fresh signals at the clock's time with this basin MLSS, then one engine run. */
      async mlss(v: number) {
        await writeSignals(h.ctx, tagIds, { ...FIXTURE_VALUES, 'AIT-111': v }, { history_h: 1, at: new Date(now_ms) });
        return engine.runOnce(plantId);
      },
      async run(opts: Parameters<typeof writeSignals>[3] = {}) {
        await writeSignals(h.ctx, tagIds, FIXTURE_VALUES, { history_h: 1, ...opts, at: new Date(now_ms) });
        return engine.runOnce(plantId);
      },
      mlssAlarms: () => alarms('mlss-low'),
      alarms,
    };
  }

  /** A low MLSS held for the whole on-delay: one raised mlss-low alarm. */
  async function raisedLowMlss() {
    const p = await plant();
    await p.mlss(1.9);
    p.advance(ON_DELAY_S);
    await p.mlss(1.9);
    const [a] = await p.mlssAlarms();
    expect(a?.state).toBe('raised');
    return { ...p, alarm: a };
  }

  it('on-delay: a low MLSS raises only once it held for the whole delay', async () => {
    const p = await plant();
    await p.mlss(1.9);
    p.advance(ON_DELAY_S - 1);
    await p.mlss(1.9);
    expect(await p.mlssAlarms()).toHaveLength(0);
    p.advance(1);
    await p.mlss(1.9);
    const [a, ...more] = await p.mlssAlarms();
    expect(more).toEqual([]);
    expect(a).toMatchObject({ state: 'raised', priority: 2, target: 'ab1', limit: 2 });
    expect(a.raised_at).toEqual(p.at());
    expect(a.value).toBeCloseTo(1.9, 9);
    expect(a.message).toMatch(/MLSS in ab1 is 1.90 g\/L, below the floor of 2 g\/L.*licensed operator decides/);
  });

  it('deadband: back above the floor but within 0.1 g/L keeps the alarm; beyond it clears with the time', async () => {
    const p = await raisedLowMlss();
    p.advance(10);
    await p.mlss(2.05);
    expect((await p.mlssAlarms()).map((a) => a.state)).toEqual(['raised']);
    p.advance(10);
    await p.mlss(2.2);
    const [a] = await p.mlssAlarms();
    expect(a).toMatchObject({ state: 'cleared', cleared_at: p.at(), acknowledged_by: null });
  });

  it('acknowledge: operator+, who and when, audited; twice is a conflict; analyst refused', async () => {
    const { plantId, alarm } = await raisedLowMlss();
    const url = `/api/v1/plants/${plantId}/alarms/${alarm.id}/ack`;
    expect((await (await h.agent('analyst')).post(url).send({})).status).toBe(403);
    const op = await h.agent('operator');
    const before = Date.now();
    const r = await op.post(url).send({ comment: 'sampling the basin' });
    expect(r.status).toBe(200);
    expect(r.body).toMatchObject({ id: alarm.id, state: 'acknowledged', acknowledgedBy: h.users.operator.id });
    // Acknowledgement is a person's act, stamped with the server's wall clock.
    expect(Date.parse(r.body.acknowledgedAt)).toBeGreaterThanOrEqual(before - 1000);
    const audit = await h.ctx.db.pool.query(`SELECT actor, target, details FROM audit_log WHERE action = 'alarm.acknowledge' AND target = $1`, [`alarm:${alarm.id}`]);
    expect(audit.rows).toEqual([{ actor: h.users.operator.email, target: `alarm:${alarm.id}`, details: expect.objectContaining({ rule: 'mlss-low', comment: 'sampling the basin' }) }]);
    expect((await op.post(url).send({})).status).toBe(409);
    expect((await op.post(`/api/v1/plants/${plantId}/alarms/999999/ack`).send({})).status).toBe(404);
  });

  it('clear: an acknowledged alarm beyond the deadband returns to normal, keeping who acknowledged it', async () => {
    const p = await raisedLowMlss();
    expect((await (await h.agent('operator')).post(`/api/v1/plants/${p.plantId}/alarms/${p.alarm.id}/ack`).send({})).status).toBe(200);
    p.advance(10);
    await p.mlss(2.2);
    const [a] = await p.mlssAlarms();
    expect(a).toMatchObject({ state: 'cleared', cleared_at: p.at(), acknowledged_by: h.users.operator.id });
  });

  it('chatter shorter than the on-delay raises nothing; a cleared unacknowledged alarm can still be acknowledged', async () => {
    const p = await plant();
    // Low, normal, low again: the second low restarts the on-delay, so the first low's start does not count.
    await p.mlss(1.9);
    p.advance(ON_DELAY_S / 4);
    await p.mlss(2.2);
    p.advance(ON_DELAY_S / 4);
    await p.mlss(1.9);
    p.advance(ON_DELAY_S - 1);
    await p.mlss(1.9);
    expect(await p.mlssAlarms()).toHaveLength(0);
    p.advance(1);
    await p.mlss(1.9);
    p.advance(10);
    await p.mlss(2.3);
    const [a, ...more] = await p.mlssAlarms();
    expect(more).toEqual([]);
    expect(a).toMatchObject({ state: 'cleared', acknowledged_at: null });
    const r = await (await h.agent('operator')).post(`/api/v1/plants/${p.plantId}/alarms/${a.id}/ack`).send({});
    expect(r.body).toMatchObject({ state: 'cleared', acknowledgedBy: h.users.operator.id });
  });

  it('a stale tag raises tag-stale (P4) for that tag only, after the on-delay; fresh again clears it', async () => {
    const p = await plant();
    const staleLevel = { receivedAgo_s: { 'LIT-211': 400 } };
    await p.run(staleLevel);
    p.advance(ON_DELAY_S);
    await p.run({ receivedAgo_s: { 'LIT-211': 400 + ON_DELAY_S } });
    expect((await p.alarms('tag-stale')).map(({ target, priority, state }) => ({ target, priority, state }))).toEqual([{ target: 'LIT-211', priority: 4, state: 'raised' }]);
    p.advance(10);
    await p.run();
    expect((await p.alarms('tag-stale')).map((a) => a.state)).toEqual(['cleared']);
  });

  /**
   * ISA-18.2 designed suppression at a start (flood: ISA-18.2 gives more than 10 alarms in 10
   * minutes for one operator as its example [M]). An ingest worker starts at the clock's time
   * and every tag arrives 100 s late (stale after 3 periods; ingest not down: 100 s < 120 s).
   */
  it('after a start, stale tags are suppressed by design (listed with the reason) for the window, then annunciated', async () => {
    const p = await plant();
    const worker = `test-${p.plantId}`;
    await h.ctx.db.pool.query(`INSERT INTO ingest_workers (id, host, pid, started_at, heartbeat_at, heartbeat_ms, status) VALUES ($1, 'test', 1, $2, now(), 5000, '{}')`, [worker, p.at()]);
    try {
      const allLate = { receivedAgo_s: Object.fromEntries(Object.keys(FIXTURE_VALUES).map((n) => [n, 100])) };
      await p.run(allLate);
      p.advance(ON_DELAY_S);
      await p.run(allLate);
      const during = await p.alarms('tag-stale');
      // Every tag stale after 3 periods < 100 s is listed suppressed, none annunciated (LIT-211, period 60 s, is not stale yet).
      expect(during.map((a) => a.target).sort()).toEqual(Object.keys(FIXTURE_VALUES).filter((n) => n !== 'LIT-211').sort());
      expect(during.every((a) => a.state === 'raised' && /suppressed by design/.test(a.suppressed_reason))).toBe(true);
      const listed = await (await h.agent('analyst')).get(`/api/v1/plants/${p.plantId}/alarms?state=raised`);
      expect(listed.body.alarms.filter((a: { suppressedReason: string | null }) => a.suppressedReason !== null)).toHaveLength(during.length);
      // The window: max(6 periods, 180 s) after the start; the fixture periods are at most 30 s, so 180 s.
      p.advance(SETTINGS['alarm.start_suppression_min_s'].default - ON_DELAY_S - 1);
      await p.run(allLate);
      expect((await p.alarms('tag-stale')).every((a) => a.suppressed_reason !== null)).toBe(true);
      p.advance(1);
      await p.run(allLate);
      const after = await p.alarms('tag-stale');
      expect(after.map((a) => a.id)).toEqual(during.map((a) => a.id));
      expect(after.every((a) => a.suppressed_reason === null && a.raised_at.getTime() === p.at().getTime())).toBe(true);
    } finally {
      await h.ctx.db.pool.query(`UPDATE ingest_workers SET stopped_at = now() WHERE id = $1`, [worker]);
    }
  });

  it('summary: raises per 10 minutes, a flood above 10 (ISA-18.2 / EEMUA 191 measure [M]); suppressed ones counted apart', async () => {
    const p = await plant();
    const from = Date.parse('2026-01-01T00:00:00Z');
    const insert = (n: number, at_ms: number, suppressed: string | null = null) =>
      h.ctx.db.pool.query(
        `INSERT INTO alarms (plant_id, rule, target, priority, state, message, raised_at, suppressed_reason, cleared_at)
         SELECT $1, 'tag-bad', 't' || g, 3, 'cleared', 'x', $2, $3, $2 FROM generate_series(1, $4) g`,
        [p.plantId, new Date(at_ms), suppressed, n],
      );
    await insert(10, from + 60_000); // bucket 0: 10, exactly the threshold: no flood
    await insert(11, from + 10 * 60_000); // bucket 1 starts at 10 min: 11 > 10, a flood
    await insert(5, from + 25 * 60_000, 'start'); // bucket 2: suppressed only
    await insert(1, from + 30 * 60_000); // at `to`: outside [from, to)
    const r = await (await h.agent('analyst')).get(`/api/v1/plants/${p.plantId}/alarms/summary?from=${new Date(from).toISOString()}&to=${new Date(from + 30 * 60_000).toISOString()}`);
    expect(r.status).toBe(200);
    expect(r.body).toMatchObject({ bucket_min: 10, floodThreshold: 10, floodBuckets: 1 });
    expect(r.body.buckets).toEqual([
      { from: '2026-01-01T00:00:00.000Z', raised: 10, suppressed: 0, flood: false },
      { from: '2026-01-01T00:10:00.000Z', raised: 11, suppressed: 0, flood: true },
      { from: '2026-01-01T00:20:00.000Z', raised: 0, suppressed: 5, flood: false },
    ]);
  });

  it('shelving: operator+, audited, expires on the engine clock; a new occurrence during the shelf stays shelved', async () => {
    const p = await raisedLowMlss();
    const url = `/api/v1/alarms/${p.alarm.id}/shelve`;
    expect((await (await h.agent('analyst')).post(url).send({ minutes: 5, reason: 'probe cleaning' })).status).toBe(403);
    const op = await h.agent('operator');
    expect((await op.post(url).send({ minutes: 481, reason: 'too long' })).status).toBe(422);
    const r = await op.post(url).send({ minutes: 5, reason: 'probe cleaning' });
    expect(r.status).toBe(200);
    expect(r.body).toMatchObject({ shelvedBy: h.users.operator.id, shelveReason: 'probe cleaning' });
    const audit = await h.ctx.db.pool.query(`SELECT details FROM audit_log WHERE action = 'alarm.shelve' AND target = $1`, [`alarm:${p.alarm.id}`]);
    expect(audit.rows[0].details).toMatchObject({ minutes: 5, reason: 'probe cleaning' });
    // Clears and comes back while shelved: the new occurrence carries the shelf (not annunciated).
    p.advance(10);
    await p.mlss(2.3);
    await p.mlss(1.9);
    p.advance(ON_DELAY_S);
    await p.mlss(1.9);
    const [, again] = await p.mlssAlarms();
    expect(again).toMatchObject({ state: 'raised', shelve_reason: 'probe cleaning' });
    expect(again.shelved_until.getTime()).toBeGreaterThan(p.at().getTime());
    // Past the five minutes on the engine's clock: the shelf is gone, the alarm annunciated again.
    p.advance(5 * 60);
    await p.mlss(1.9);
    const [, expired] = await p.mlssAlarms();
    expect(expired).toMatchObject({ state: 'raised', shelved_until: null });
    expect((await op.post(`/api/v1/alarms/${again.id}/unshelve`).send({})).status).toBe(409);
  });
});
