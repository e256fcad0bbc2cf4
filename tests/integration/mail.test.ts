import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startBalanceEngine, type BalanceEngine } from '../../server/jobs/balance-engine.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';
import { FIXTURE_VALUES, seedFixturePlant, writeSignals } from './balance-fixture.ts';

describe('e-mail: alarm mail and shift summary arrive in the built-in catcher', () => {
  let h: TestApp;
  let engine: BalanceEngine;
  let plantId: number;
  let tagIds: Record<string, number>;
  beforeAll(async () => {
    h = await createTestApp();
    ({ plantId, tagIds } = await seedFixturePlant(h.ctx));
    const admin = await h.agent('admin');
    const put = await admin.put('/api/v1/settings').send({ plantId: 0, values: { 'alarm.on_delay_s': 0, 'mail.recipients': ['shift@plant.invalid', 'lead@plant.invalid'] } });
    expect(put.status).toBe(200);
    engine = await startBalanceEngine(h.ctx, { schedule: false, catcherPort: 0 });
  });
  afterAll(async () => {
    await engine?.stop();
    await h.close();
  });

  it('a raised P2 alarm is mailed to the recipients; admins read it in the outbox', async () => {
    expect(engine.catcherUrl).toMatch(/^smtp:\/\/127\.0\.0\.1:\d+$/);
    await writeSignals(h.ctx, tagIds, { ...FIXTURE_VALUES, 'AIT-111': 1.5 }, { history_h: 1 });
    await engine.runOnce(plantId);
    const admin = await h.agent('admin');
    const list = await admin.get('/api/v1/outbox');
    expect(list.status).toBe(200);
    const mlss = list.body.filter((m: { subject: string }) => m.subject.includes('mlss-low'));
    expect(mlss).toHaveLength(1);
    expect(mlss[0]).toMatchObject({ subject: '[Flocstream P2 raised] Fixture Works: mlss-low ab1', to: ['shift@plant.invalid', 'lead@plant.invalid'], from: 'flocstream@localhost.invalid' });
    // Priority 3 alarms (stored fraction 0.4 > 0.3, SRT off target) are raised but not mailed (mail.min_priority 2).
    expect(list.body.some((m: { subject: string }) => m.subject.includes('stored-fraction-high'))).toBe(false);
    const one = await admin.get(`/api/v1/outbox/${mlss[0].id}`);
    expect(one.body.text).toMatch(/MLSS in ab1 is 1.50 g\/L/);
    expect(one.body.text).toMatch(/licensed operator decides/);
    expect(one.body.raw).toMatch(/^[\s\S]*Content-Transfer-Encoding: base64/);
    const sent = await h.ctx.db.pool.query(`SELECT status, recipients FROM notifications WHERE kind = 'alarm'`);
    expect(sent.rows).toEqual([{ status: 'sent', recipients: ['shift@plant.invalid', 'lead@plant.invalid'] }]);
    expect((await (await h.agent('integrator')).get('/api/v1/outbox')).status).toBe(403);
    expect((await admin.get('/api/v1/outbox/999999')).status).toBe(404);
  });

  it('the shift summary carries the latest figures, the alarms and the caution', async () => {
    expect(await engine.shiftSummary(plantId)).toBe(true);
    const admin = await h.agent('admin');
    const list = await admin.get('/api/v1/outbox');
    const s = list.body.find((m: { subject: string }) => m.subject.includes('shift summary'));
    const one = await admin.get(`/api/v1/outbox/${s.id}`);
    expect(one.body.text).toMatch(/Sludge inventory: 21000 kg \(basins 9000 kg, clarifiers 12000 kg\)/); // 1.5 g/L × 6000 m³ + 1.0 m × 1500 m² × 8 g/L
    expect(one.body.text).toMatch(/P2 raised\s+\S+\s+mlss-low ab1/);
    expect(one.body.text).toMatch(/licensed operator decides/);
  });

  it('no recipients: nothing is sent and the skip is recorded', async () => {
    const admin = await h.agent('admin');
    await admin.put('/api/v1/settings').send({ plantId, values: { 'mail.recipients': [] } });
    expect(await engine.shiftSummary(plantId)).toBe(false);
    const rows = await h.ctx.db.pool.query(`SELECT status, details FROM notifications WHERE kind = 'shift-summary' ORDER BY id DESC LIMIT 1`);
    expect(rows.rows[0]).toMatchObject({ status: 'skipped', details: { reason: expect.stringMatching(/no recipients/) } });
  });
});

describe('settings API', () => {
  let h: TestApp;
  beforeAll(async () => {
    h = await createTestApp();
  });
  afterAll(async () => h.close());

  it('GET shows defaults with their source; PUT validates per key, overrides per plant, audits, null removes', async () => {
    const analyst = await h.agent('analyst');
    const g = await analyst.get('/api/v1/settings');
    expect(g.status).toBe(200);
    expect(g.body.settings.find((s: { key: string }) => s.key === 'srt.target_d')).toMatchObject({ value: 10, default: 10, source: 'default', unit: 'd' });
    expect((await analyst.put('/api/v1/settings').send({ values: { 'srt.target_d': 12 } })).status).toBe(403);
    const admin = await h.agent('admin');
    const bad = await admin.put('/api/v1/settings').send({ values: { 'srt.target_d': -1, 'mail.recipients': ['not-an-address'], 'no.such': 1 } });
    expect(bad.status).toBe(422);
    expect(Object.keys(bad.body.error.fields).sort()).toEqual(['values.mail.recipients', 'values.no.such', 'values.srt.target_d'].sort());
    const ok = await admin.put('/api/v1/settings').send({ values: { 'srt.target_d': 12 } });
    expect(ok.body.settings.find((s: { key: string }) => s.key === 'srt.target_d')).toMatchObject({ value: 12, source: 'global' });
    const { plantId } = await seedFixturePlant(h.ctx, { svi: false });
    await admin.put('/api/v1/settings').send({ plantId, values: { 'srt.target_d': 15 } });
    const p = await analyst.get(`/api/v1/settings?plantId=${plantId}`);
    expect(p.body.settings.find((s: { key: string }) => s.key === 'srt.target_d')).toMatchObject({ value: 15, source: 'plant' });
    await admin.put('/api/v1/settings').send({ plantId, values: { 'srt.target_d': null } });
    const back = await analyst.get(`/api/v1/settings?plantId=${plantId}`);
    expect(back.body.settings.find((s: { key: string }) => s.key === 'srt.target_d')).toMatchObject({ value: 12, source: 'global' });
    expect((await analyst.get('/api/v1/settings?plantId=999999')).status).toBe(404);
    const audit = await h.ctx.db.pool.query(`SELECT details FROM audit_log WHERE action = 'settings.update' ORDER BY id`);
    expect(audit.rows[0].details.changes['srt.target_d']).toEqual({ from: 10, to: 12 });
  });
});
