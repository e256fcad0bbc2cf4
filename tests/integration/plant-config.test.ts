import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { balanceRepository } from '../../server/repositories/balance.repository.ts';
import { plantConfig, type PlantConfig } from '../../shared/contracts/plant-config.ts';
import { kestrelBendConfig } from '../../simulators/plant/kestrel-bend.config.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';
import { seedDemoPlant } from '../helpers/plants.ts';

type Agent = Awaited<ReturnType<TestApp['agent']>>;
const EP = { mqttUrl: 'mqtt://127.0.0.1:1883', opcuaUrl: 'opc.tcp://127.0.0.1:4840/flocstream-sim' };

/** A document without what legitimately differs between two plants: code and name. */
function withoutIdentity(d: PlantConfig) {
  const { code: _c, name: _n, ...plant } = d.plant;
  return { ...d, plant };
}

describe('plant configuration document', () => {
  let h: TestApp;
  let integ: Agent;
  let kb: number;
  let original: PlantConfig;

  beforeAll(async () => {
    h = await createTestApp();
    integ = await h.agent('integrator');
    kb = (await seedDemoPlant(h.ctx, EP)).plantId;
  });
  afterAll(async () => h.close());

  it('the demo plant is created through the document path, once (an existing plant is left alone)', async () => {
    expect(plantConfig.safeParse(kestrelBendConfig(EP)).success).toBe(true);
    expect(await seedDemoPlant(h.ctx, EP)).toEqual({ plantId: kb, created: false });
    const audit = await h.ctx.db.pool.query(`SELECT actor, details FROM audit_log WHERE action = 'plant.create_from_config' AND target = $1`, [`plant:${kb}`]);
    expect(audit.rows).toHaveLength(1);
    expect(audit.rows[0].actor).toBe('system');
    // The engine sees the demo layout: two trains, one 7500 m³ MLE basin (20 % anoxic) and one 1500 m² clarifier each.
    const layout = (await balanceRepository(h.ctx.db).layoutAt(kb, new Date()))!;
    expect(layout.trains.map((t) => [t.code, t.basins[0]!.volume_m3, t.basins[0]!.aeratedFraction, t.clarifiers[0]!.area_m2, t.pumps.length])).toEqual([
      ['t1', 7500, 0.8, 1500, 2],
      ['t2', 7500, 0.8, 1500, 2],
    ]);
  });

  it('export: format 1, units by code, the trade’s keys, no ids', async () => {
    const r = await integ.get(`/api/v1/plants/${kb}/config`);
    expect(r.status).toBe(200);
    original = r.body;
    expect(original.formatVersion).toBe(1);
    expect(original.plant).toEqual({ code: 'kb', name: 'Kestrel Bend Water Reclamation Plant', timezone: 'UTC', peakFlow_m3h: null, unitSystem: 'SI' });
    const t1 = original.model.trains[0]!;
    expect(t1.aerationBasins[0]).toMatchObject({ code: 'ab1', volume_m3: 7500, aeratedFraction: 0.8, inService: true });
    expect(t1.aerationBasins[0]!.history).toHaveLength(1);
    expect(t1.pumps.find((p) => p.code === 'ras1')).toMatchObject({ kind: 'ras', capacity_m3h: 1150, servesClarifier: 'sc1' });
    expect(original.tags).toHaveLength(18);
    expect(original.signalMap).toContainEqual({ signal: 'basin.mlss', target: { type: 'basin', code: 'ab1' }, tag: 'AIT-111' });
    expect(original.signalMap).toContainEqual({ signal: 'plant.influentFlow', target: { type: 'plant', code: null }, tag: 'FIT-101' });
    expect(JSON.stringify(original)).not.toMatch(/"(id|plantId|trainId|sourceId|tagId)"/);
  });

  it('round trip: a second plant from the document exports the same document apart from code and name', async () => {
    const made = await integ.post('/api/v1/plants?code=kb2').send({ ...original, name: 'Kestrel Bend (copy)' });
    expect(made.status).toBe(201);
    expect(made.body).toMatchObject({ code: 'kb2', name: 'Kestrel Bend (copy)' });
    const copy = (await integ.get(`/api/v1/plants/${made.body.id}/config`)).body as PlantConfig;
    expect(copy.plant.code).toBe('kb2');
    expect(withoutIdentity(copy)).toEqual(withoutIdentity(original));
    // Same code again: 409, nothing created.
    expect((await integ.post('/api/v1/plants?code=kb2').send(original)).status).toBe(409);
    const n = await h.ctx.db.pool.query(`SELECT count(*)::int n FROM plants`);
    expect(n.rows[0].n).toBe(2);
  });

  it('secrets never leave: a source with a password exports {secretRequired: true}; a copy gets it disabled until a secret is set', async () => {
    const src = (await integ.get(`/api/v1/plants/${kb}/sources`)).body.sources.find((s: { name: string }) => s.name === 'kb-mqtt');
    expect((await integ.patch(`/api/v1/sources/${src.id}`).send({ username: 'ingest', password: 'very-secret-pw-42' })).status).toBe(200);
    const r = await integ.get(`/api/v1/plants/${kb}/config`);
    expect(JSON.stringify(r.body)).not.toContain('very-secret-pw-42');
    const exported = r.body.sources.find((s: { name: string }) => s.name === 'kb-mqtt');
    expect(exported).toMatchObject({ username: 'ingest', password: { secretRequired: true }, enabled: true });

    const made = await integ.post('/api/v1/plants').send({ ...r.body, code: 'kb3', name: 'Kestrel Bend 3' });
    expect(made.status).toBe(201);
    const rows = await h.ctx.db.pool.query(`SELECT name, enabled, secret FROM sources WHERE plant_id = $1 ORDER BY name`, [made.body.id]);
    expect(rows.rows).toEqual([
      { name: 'kb-mqtt', enabled: false, secret: null },
      { name: 'kb-opcua', enabled: true, secret: null },
    ]);
  });

  it('PUT ?dryRun=1 lists the changes without writing; without dryRun applies them in one transaction (audited)', async () => {
    const before = (await integ.get(`/api/v1/plants/${kb}/config`)).body as PlantConfig;
    const doc = structuredClone(before);
    doc.plant.peakFlow_m3h = 4200;
    doc.model.trains[0]!.aerationBasins[0]!.volume_m3 = 8000;
    doc.model.trains[1]!.secondaryClarifiers[0]!.inService = false;
    doc.settings = { 'srt.target_d': 12 };
    doc.tags = doc.tags.filter((t) => t.name !== 'FIT-401');
    doc.signalMap = doc.signalMap.filter((m) => m.tag !== 'FIT-401');
    doc.sources = doc.sources.map((s) => (s.name === 'kb-opcua' ? { ...s, url: 'opc.tcp://127.0.0.1:4999/plc' } : s));

    const dry = await integ.put(`/api/v1/plants/${kb}/config?dryRun=1`).send(doc);
    expect(dry.status).toBe(200);
    expect(dry.body.applied).toBe(false);
    const ops = dry.body.changes.map((c: { op: string; path: string }) => `${c.op} ${c.path.replace(/\[\d{4}-[^\]]+\]$/, '[t]')}`);
    expect(ops.sort()).toEqual(
      [
        'update plant.peakFlow_m3h',
        'add model.trains[t1].aerationBasins[ab1].history[t]',
        'add model.trains[t2].secondaryClarifiers[sc2].history[t]',
        'update settings[srt.target_d]',
        'update sources[kb-opcua]',
        'remove tags[FIT-401]',
        'remove signalMap[plant.effluentFlow@plant:]',
      ].sort(),
    );
    const peak = dry.body.changes.find((c: { path: string }) => c.path === 'plant.peakFlow_m3h');
    expect(peak).toEqual({ op: 'update', path: 'plant.peakFlow_m3h', before: null, after: 4200 });
    // Nothing written by the dry run.
    expect((await integ.get(`/api/v1/plants/${kb}/config`)).body).toEqual(before);

    const applied = await integ.put(`/api/v1/plants/${kb}/config`).send(doc);
    expect(applied.status).toBe(200);
    expect(applied.body.applied).toBe(true);
    const after = (await integ.get(`/api/v1/plants/${kb}/config`)).body as PlantConfig;
    expect(after.plant.peakFlow_m3h).toBe(4200);
    expect(after.model.trains[0]!.aerationBasins[0]!.volume_m3).toBe(8000);
    expect(after.model.trains[0]!.aerationBasins[0]!.history!.map((v) => v.volume_m3)).toEqual([7500, 8000]);
    expect(after.settings).toEqual({ 'srt.target_d': 12 });
    expect(after.tags.map((t) => t.name)).not.toContain('FIT-401');
    // The clarifier out of service now is out of the engine's layout now, and still in it for the past.
    const repo = balanceRepository(h.ctx.db);
    expect((await repo.layoutAt(kb, new Date()))!.trains[1]!.clarifiers).toHaveLength(0);
    expect((await repo.layoutAt(kb, new Date(Date.now() - 3_600_000)))!.trains[1]!.clarifiers).toHaveLength(1);
    // Applying the same document again changes nothing.
    expect((await integ.put(`/api/v1/plants/${kb}/config?dryRun=1`).send(after)).body.changes).toEqual([]);
    const audit = await h.ctx.db.pool.query(`SELECT details FROM audit_log WHERE action = 'plant.config_apply' AND target = $1`, [`plant:${kb}`]);
    expect(audit.rows).toHaveLength(1);
    expect(audit.rows[0].details.changes).toHaveLength(7);
  });

  it('an invalid document is a 422 naming the field, and changes nothing', async () => {
    const doc = structuredClone(original);
    doc.tags[0] = { ...doc.tags[0]!, source: 'nowhere' };
    doc.model.trains[0]!.aerationBasins[0]!.aeratedFraction = 1.5;
    const r = await integ.put(`/api/v1/plants/${kb}/config`).send(doc);
    expect(r.status).toBe(422);
    expect(r.body.error.fields).toHaveProperty(['tags.0.source']);
    expect(r.body.error.fields).toHaveProperty(['model.trains.0.aerationBasins.0.aeratedFraction']);
    const made = await integ.post('/api/v1/plants').send({ ...doc, code: 'bad' });
    expect(made.status).toBe(422);
    expect((await h.ctx.db.pool.query(`SELECT count(*)::int n FROM plants WHERE code = 'bad'`)).rows[0].n).toBe(0);
  });
});
