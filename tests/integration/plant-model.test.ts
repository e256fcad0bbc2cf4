import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { balanceRepository } from '../../server/repositories/balance.repository.ts';
import { plantModelRepository } from '../../server/repositories/plant-model.repository.ts';
import { computeBalance } from '../../shared/domain/balance/assemble.ts';
import { defaultSettings } from '../../shared/contracts/settings.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';
import { fixtureInputs } from '../unit/domain/balance-fixture.ts';

type Agent = Awaited<ReturnType<TestApp['agent']>>;

describe('plant model API', () => {
  let h: TestApp;
  let integ: Agent;
  let analyst: Agent;
  let plantA: number;
  let plantB: number;
  let trainA: number;
  let clarifierB: number;

  beforeAll(async () => {
    h = await createTestApp();
    integ = await h.agent('integrator');
    analyst = await h.agent('analyst');
  });
  afterAll(async () => h.close());

  it('creates plants (integrator and up), validating the time zone; duplicate codes are 409', async () => {
    const a = await integ.post('/api/v1/plants').send({ code: 'alder', name: 'Alder Creek WRF', timezone: 'America/Chicago', peakFlow_m3h: 4000, unitSystem: 'US' });
    expect(a.status).toBe(201);
    expect(a.body).toMatchObject({ code: 'alder', timezone: 'America/Chicago', peakFlow_m3h: 4000, unitSystem: 'US', retiredAt: null });
    plantA = a.body.id;
    const b = await integ.post('/api/v1/plants').send({ code: 'birch', name: 'Birch Hollow', timezone: 'Europe/Berlin' });
    expect(b.body.unitSystem).toBe('SI');
    plantB = b.body.id;
    const badTz = await integ.post('/api/v1/plants').send({ code: 'x', name: 'X', timezone: 'Mars/Olympus' });
    expect(badTz.status).toBe(422);
    expect(badTz.body.error.fields).toHaveProperty('timezone');
    expect((await integ.post('/api/v1/plants').send({ code: 'alder', name: 'again', timezone: 'UTC' })).status).toBe(409);
    expect((await analyst.post('/api/v1/plants').send({ code: 'y', name: 'Y', timezone: 'UTC' })).status).toBe(403);
    const audit = await h.ctx.db.pool.query(`SELECT actor FROM audit_log WHERE action = 'plant.create' AND target = $1`, [`plant:${plantA}`]);
    expect(audit.rows[0]?.actor).toBe(h.users.integrator.email);
  });

  it('trains, basins, clarifiers and pumps: create, edit, delete', async () => {
    const t = await integ.post(`/api/v1/plants/${plantA}/trains`).send({ code: 't1', name: 'Train 1' });
    expect(t.status).toBe(201);
    trainA = t.body.id;
    const b = await integ.post(`/api/v1/plants/${plantA}/basins`).send({ trainId: trainA, code: 'ab1', name: 'Basin 1', volume_m3: 5000, aeratedFraction: 0.8, sideWaterDepth_m: 5 });
    expect(b.status).toBe(201);
    expect(b.body).toMatchObject({ code: 'ab1', volume_m3: 5000, aeratedFraction: 0.8, sideWaterDepth_m: 5, inService: true });
    expect(b.body.history).toHaveLength(1);
    const c = await integ.post(`/api/v1/plants/${plantA}/clarifiers`).send({ trainId: trainA, code: 'sc1', name: 'Clarifier 1', area_m2: 700, sideWaterDepth_m: 4.5, feedDepth_m: 1.5, count: 2 });
    expect(c.status).toBe(201);
    const p = await integ.post(`/api/v1/plants/${plantA}/pumps`).send({ kind: 'ras', code: 'ras1', name: 'RAS 1', capacity_m3h: 900, clarifierId: c.body.id });
    expect(p.status).toBe(201);
    expect(p.body).toMatchObject({ trainId: trainA, clarifierId: c.body.id, capacity_m3h: 900 });
    const w = await integ.post(`/api/v1/plants/${plantA}/pumps`).send({ kind: 'was', code: 'was1', name: 'WAS 1', capacity_m3h: 0, trainId: trainA });
    expect(w.status).toBe(201);

    const renamed = await integ.patch(`/api/v1/plants/${plantA}/basins/${b.body.id}`).send({ name: 'Aeration basin 1' });
    expect(renamed.body.name).toBe('Aeration basin 1');
    expect(renamed.body.history).toHaveLength(1); // a name is not geometry
    expect((await integ.patch(`/api/v1/plants/${plantA}/trains/${trainA}`).send({ name: 'North train' })).body.name).toBe('North train');
    expect((await integ.delete(`/api/v1/plants/${plantA}/pumps/${w.body.id}`)).status).toBe(200);

    const model = await analyst.get(`/api/v1/plants/${plantA}/model`);
    expect(model.status).toBe(200);
    const tr = model.body.trains[0];
    expect(tr.basins.map((x: { code: string }) => x.code)).toEqual(['ab1']);
    expect(tr.clarifiers[0]).toMatchObject({ area_m2: 700, feedDepth_m: 1.5, count: 2 });
    expect(tr.pumps.map((x: { code: string }) => x.code)).toEqual(['ras1']);
    // The read API's layout shows the same geometry.
    const layout = await analyst.get(`/api/v1/plants/${plantA}`);
    expect(layout.body.trains[0].basins[0]).toMatchObject({ volume_m3: 5000, aeratedFraction: 0.8 });
  });

  it('422 with fields: clarifier without area, negative volume, fraction over 1, RAS pump on another plant’s clarifier', async () => {
    const tb = await integ.post(`/api/v1/plants/${plantB}/trains`).send({ code: 't1', name: 'Train 1' });
    clarifierB = (await integ.post(`/api/v1/plants/${plantB}/clarifiers`).send({ trainId: tb.body.id, code: 'fc1', name: 'Final 1', area_m2: 500, sideWaterDepth_m: 4 })).body.id;

    const noArea = await integ.post(`/api/v1/plants/${plantA}/clarifiers`).send({ trainId: trainA, code: 'sc2', name: 'Clarifier 2', sideWaterDepth_m: 4 });
    expect(noArea.status).toBe(422);
    expect(noArea.body.error.fields).toHaveProperty('area_m2');
    const zeroArea = await integ.post(`/api/v1/plants/${plantA}/clarifiers`).send({ trainId: trainA, code: 'sc2', name: 'Clarifier 2', area_m2: 0, sideWaterDepth_m: 4 });
    expect(zeroArea.body.error.fields.area_m2[0]).toMatch(/greater than 0/);
    const negVol = await integ.post(`/api/v1/plants/${plantA}/basins`).send({ trainId: trainA, code: 'ab2', name: 'Basin 2', volume_m3: -10 });
    expect(negVol.status).toBe(422);
    expect(negVol.body.error.fields).toHaveProperty('volume_m3');
    const frac = await integ.post(`/api/v1/plants/${plantA}/basins`).send({ trainId: trainA, code: 'ab2', name: 'Basin 2', volume_m3: 10, aeratedFraction: 1.2 });
    expect(frac.status).toBe(422);
    expect(frac.body.error.fields.aeratedFraction[0]).toMatch(/between 0 and 1/);
    const foreign = await integ.post(`/api/v1/plants/${plantA}/pumps`).send({ kind: 'ras', code: 'ras9', name: 'RAS 9', capacity_m3h: 500, clarifierId: clarifierB });
    expect(foreign.status).toBe(422);
    expect(foreign.body.error.fields.clarifierId[0]).toMatch(/another plant/);
    const foreignTrain = await integ.post(`/api/v1/plants/${plantA}/basins`).send({ trainId: tb.body.id, code: 'ab3', name: 'Basin 3', volume_m3: 100 });
    expect(foreignTrain.status).toBe(422);
    expect(foreignTrain.body.error.fields).toHaveProperty('trainId');
    const dupCode = await integ.post(`/api/v1/plants/${plantA}/basins`).send({ trainId: trainA, code: 'ab1', name: 'again', volume_m3: 100 });
    expect(dupCode.status).toBe(422);
    expect(dupCode.body.error.fields).toHaveProperty('code');
    // A unit of another plant is not reachable through this plant's path.
    expect((await integ.patch(`/api/v1/plants/${plantA}/clarifiers/${clarifierB}`).send({ name: 'x' })).status).toBe(404);
    // Nothing of the refused requests was stored.
    const n = await h.ctx.db.pool.query(`SELECT count(*)::int n FROM basins b JOIN trains t ON t.id = b.train_id WHERE t.plant_id = $1`, [plantA]);
    expect(n.rows[0].n).toBe(1);
  });

  it('plant scope: a token scoped to plant A gets 403 on plant B (model, config, settings)', async () => {
    const made = await integ.post('/api/v1/tokens').send({ name: 'alder only', role: 'integrator', expiresInDays: 1, plantIds: [plantA] });
    expect(made.status).toBe(201);
    const tok = (r: request.Test) => r.set('Authorization', `Bearer ${made.body.token}`);
    expect((await tok(request(h.app).get(`/api/v1/plants/${plantA}/model`))).status).toBe(200);
    expect((await tok(request(h.app).get(`/api/v1/plants/${plantA}/config`))).status).toBe(200);
    for (const [method, url, body] of [
      ['get', `/api/v1/plants/${plantB}/model`, undefined],
      ['get', `/api/v1/plants/${plantB}/config`, undefined],
      ['put', `/api/v1/plants/${plantB}/config?dryRun=1`, { formatVersion: 1, plant: { code: 'birch', name: 'B' } }],
      ['patch', `/api/v1/plants/${plantB}`, { name: 'taken over' }],
      ['delete', `/api/v1/plants/${plantB}`, undefined],
      ['post', `/api/v1/plants/${plantB}/trains`, { code: 't9', name: 'T9' }],
      ['patch', `/api/v1/plants/${plantB}/clarifiers/${clarifierB}`, { area_m2: 1 }],
      ['get', `/api/v1/settings?plantId=${plantB}`, undefined],
      ['post', '/api/v1/plants', { code: 'new', name: 'New', timezone: 'UTC' }],
    ] as const) {
      const r = await tok(request(h.app)[method](url).send(body));
      expect(r.status, `${method} ${url}`).toBe(403);
    }
    expect((await tok(request(h.app).get(`/api/v1/settings?plantId=${plantA}`))).status).toBe(200);
    expect((await integ.get(`/api/v1/plants/${plantB}`)).body.name).toBe('Birch Hollow');
  });

  it('effective dating: the balance uses the basin volume that held at each time (hand computation)', async () => {
    // Basin 6000 m³ from 2026-01-01; enlarged to 8000 m³ from 2026-06-01 (a recommissioned
    // lane). MLSS 3.0 g/L = 3.0 kg/m³ throughout, so the aeration inventory is
    // 3.0 × 6000 = 18 000 kg before the change and 3.0 × 8000 = 24 000 kg after it.
    const t = await integ.post(`/api/v1/plants/${plantB}/trains`).send({ code: 't2', name: 'Train 2' });
    const b = await integ.post(`/api/v1/plants/${plantB}/basins`).send({ trainId: t.body.id, code: 'ab1', name: 'Basin 1', volume_m3: 6000, effectiveFrom: '2026-01-01T00:00:00Z' });
    const ch = await integ.patch(`/api/v1/plants/${plantB}/basins/${b.body.id}`).send({ volume_m3: 8000, effectiveFrom: '2026-06-01T00:00:00Z' });
    expect(ch.status).toBe(200);
    expect(ch.body.history.map((v: { volume_m3: number }) => v.volume_m3)).toEqual([6000, 8000]);
    expect(ch.body.history[1].aeratedFraction).toBe(1); // unchanged fields carry over into the new version

    const repo = balanceRepository(h.ctx.db);
    const massAt = async (iso: string) => {
      const layout = (await repo.layoutAt(plantB, new Date(iso)))!;
      const basin = layout.trains.flatMap((x) => x.basins).find((x) => x.code === 'ab1')!;
      const inputs = fixtureInputs();
      // The fixture's MLSS reading, mapped to this plant's basin.
      inputs.readings = inputs.readings.filter((r) => r.signal === 'basin.mlss').map((r) => ({ ...r, targetId: basin.id }));
      const out = computeBalance({ ...inputs, layout }, defaultSettings());
      return out.data.basins.find((x) => x.code === 'ab1')!.mass_kg.value;
    };
    expect(await massAt('2026-03-15T00:00:00Z')).toBeCloseTo(18_000, 9);
    expect(await massAt('2026-07-15T00:00:00Z')).toBeCloseTo(24_000, 9);
    expect(await massAt('2026-06-01T00:00:00Z')).toBeCloseTo(24_000, 9); // from effectiveFrom on, inclusive
    // History imported from before the plant was set up uses the first geometry.
    expect(await massAt('2020-01-01T00:00:00Z')).toBeCloseTo(18_000, 9);
    // A geometry change later than the last one leaves earlier answers alone.
    expect((await analyst.get(`/api/v1/plants/${plantB}/model?at=2026-03-15T00:00:00Z`)).body.trains.find((x: { code: string }) => x.code === 't2').basins[0].volume_m3).toBe(6000);
  });

  it('a clarifier out of service for a month is two edits and leaves the layout only for that month', async () => {
    const repo = plantModelRepository(h.ctx.db.db);
    const c = await integ.post(`/api/v1/plants/${plantA}/clarifiers`).send({ trainId: trainA, code: 'sc3', name: 'Clarifier 3', area_m2: 900, sideWaterDepth_m: 4, effectiveFrom: '2026-01-01T00:00:00Z' });
    expect((await integ.patch(`/api/v1/plants/${plantA}/clarifiers/${c.body.id}`).send({ inService: false, effectiveFrom: '2026-08-01T00:00:00Z' })).status).toBe(200);
    const back = await integ.patch(`/api/v1/plants/${plantA}/clarifiers/${c.body.id}`).send({ inService: true, effectiveFrom: '2026-09-01T00:00:00Z' });
    expect(back.body.history.map((v: { inService: boolean }) => v.inService)).toEqual([true, false, true]);
    expect(back.body.history[2].area_m2).toBe(900);
    const has = async (iso: string) => (await repo.layoutAt(plantA, new Date(iso)))!.trains.flatMap((t) => t.clarifiers).some((x) => x.code === 'sc3');
    expect(await has('2026-07-31T23:59:59Z')).toBe(true);
    expect(await has('2026-08-15T00:00:00Z')).toBe(false);
    expect(await has('2026-09-02T00:00:00Z')).toBe(true);
    const audit = await h.ctx.db.pool.query(`SELECT count(*)::int n FROM audit_log WHERE action = 'clarifier.update' AND target = $1`, [`clarifier:${c.body.id}`]);
    expect(audit.rows[0].n).toBe(2);
  });

  it('CSV exports honour the plant unit system (US: gpm, unit in the header); JSON stays SI', async () => {
    // Plant A was created with unitSystem US. 227.12470704 m³/h = 1000 gpm (1 gpm = 0.22712470704 m³/h, from
    // 1 US gal = 3.785411784 L exactly, NIST SP 811 (2008) App. B).
    const src = await h.ctx.db.pool.query(`INSERT INTO sources (plant_id, name, kind, url) VALUES ($1, 'a-mqtt', 'mqtt', 'mqtt://127.0.0.1:1') RETURNING id`, [plantA]);
    const tag = await h.ctx.db.pool.query(`INSERT INTO tags (plant_id, source_id, name, address, unit) VALUES ($1, $2, 'FIT-311', 'a/fit311', 'm3/h') RETURNING id`, [plantA, src.rows[0].id]);
    await h.ctx.db.pool.query(`INSERT INTO samples (tag_id, ts, value, quality) VALUES ($1, now() - interval '1 minute', 227.12470704, 0)`, [tag.rows[0].id]);
    const url = `/api/v1/plants/${plantA}/tags/${tag.rows[0].id}/samples`;
    const csv = await analyst.get(`${url}?format=csv`);
    const [header, row] = csv.text.trim().split('\r\n').map((l) => l.split(','));
    expect(header).toEqual(['ts', 'value [gpm]', 'min [gpm]', 'max [gpm]', 'count', 'quality', 'flags']);
    expect(Number(row![1])).toBeCloseTo(1000, 9);
    expect((await analyst.get(url)).body.points[0].value).toBe(227.12470704);
    await integ.patch(`/api/v1/plants/${plantA}`).send({ unitSystem: 'SI' });
    const si = await analyst.get(`${url}?format=csv`);
    expect(si.text.split('\r\n')[0]).toBe('ts,value [m³/h],min [m³/h],max [m³/h],count,quality,flags');
    await integ.patch(`/api/v1/plants/${plantA}`).send({ unitSystem: 'US' });
  });

  it('delete refuses while samples exist unless ?force=1; retiring keeps history and stops the engine', async () => {
    const src = await h.ctx.db.pool.query(`INSERT INTO sources (plant_id, name, kind, url) VALUES ($1, 'b-mqtt', 'mqtt', 'mqtt://127.0.0.1:1') RETURNING id`, [plantB]);
    const tag = await h.ctx.db.pool.query(`INSERT INTO tags (plant_id, source_id, name, address, unit) VALUES ($1, $2, 'AIT-1', 'b/ait1', 'g/L') RETURNING id`, [plantB, src.rows[0].id]);
    await h.ctx.db.pool.query(`INSERT INTO samples (tag_id, ts, value, quality) VALUES ($1, now(), 3.1, 0)`, [tag.rows[0].id]);

    const refused = await integ.delete(`/api/v1/plants/${plantB}`);
    expect(refused.status).toBe(409);
    expect(refused.body.error.message).toMatch(/retire/);

    const retired = await integ.patch(`/api/v1/plants/${plantB}`).send({ retiredAt: '2026-12-01T00:00:00Z' });
    expect(retired.body.retiredAt).toBe('2026-12-01T00:00:00.000Z');
    expect(await balanceRepository(h.ctx.db).plantIds()).not.toContain(plantB);
    const kept = await h.ctx.db.pool.query(`SELECT count(*)::int n FROM samples WHERE tag_id = $1`, [tag.rows[0].id]);
    expect(kept.rows[0].n).toBe(1);

    expect((await integ.delete(`/api/v1/plants/${plantB}?force=1`)).status).toBe(200);
    expect((await integ.get(`/api/v1/plants/${plantB}`)).status).toBe(404);
    const gone = await h.ctx.db.pool.query(`SELECT count(*)::int n FROM tags WHERE plant_id = $1`, [plantB]);
    expect(gone.rows[0].n).toBe(0);
    // A plant without samples deletes without force.
    const empty = await integ.post('/api/v1/plants').send({ code: 'tmp', name: 'Temporary', timezone: 'UTC' });
    expect((await integ.delete(`/api/v1/plants/${empty.body.id}`)).status).toBe(200);
  });
});
