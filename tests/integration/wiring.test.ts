import fs from 'node:fs';
import net from 'node:net';
import path from 'node:path';
import { DataType, OPCUACertificateManager, OPCUAServer, StatusCodes } from 'node-opcua';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { browseOut, ingestStatusOut, sourceOut, tagConfigOut, tagImportOut } from '../../shared/contracts/wiring.ts';
import { createTestApp, type TestApp } from '../helpers/app.ts';

type Agent = Awaited<ReturnType<TestApp['agent']>>;

function listen(server: net.Server): Promise<number> {
  return new Promise((resolve) => server.listen(0, '127.0.0.1', () => resolve((server.address() as net.AddressInfo).port)));
}
/** A port nobody listens on: bound, read, released. */
async function closedPort(): Promise<number> {
  const s = net.createServer();
  const port = await listen(s);
  await new Promise((r) => s.close(r));
  return port;
}

describe('wiring API', () => {
  let h: TestApp;
  let integ: Agent;
  let operator: Agent;
  let plant: number;
  let other: number;
  let broker: { close(cb: () => void): void };
  let brokerServer: net.Server;
  let brokerPort: number;
  let opcua: OPCUAServer;
  let opcuaUrl: string;
  const q = (text: string, values: unknown[] = []) => h.ctx.db.pool.query(text, values);
  const SECRET = 'Very-Secret-Broker-Pw-7781';

  beforeAll(async () => {
    h = await createTestApp();
    integ = await h.agent('integrator');
    operator = await h.agent('operator');
    plant = (await q(`INSERT INTO plants (code, name) VALUES ('alder', 'Alder') RETURNING id`)).rows[0].id;
    other = (await q(`INSERT INTO plants (code, name) VALUES ('birch', 'Birch') RETURNING id`)).rows[0].id;
    const train = (await q(`INSERT INTO trains (plant_id, code, name) VALUES ($1, 't1', 'T1') RETURNING id`, [plant])).rows[0].id;
    await q(`WITH u AS (INSERT INTO basins (train_id, code, name) VALUES ($1, 'ab1', 'AB1') RETURNING id) INSERT INTO basin_versions (basin_id, effective_from, volume_m3, aerated_fraction) SELECT id, now(), 5000, 1 FROM u`, [train]);
    await q(`WITH u AS (INSERT INTO clarifiers (train_id, code, name) VALUES ($1, 'fc1', 'FC1') RETURNING id) INSERT INTO clarifier_versions (clarifier_id, effective_from, area_m2, side_water_depth_m, count) SELECT id, now(), 600, 4, 1 FROM u`, [train]);
    await q(`WITH u AS (INSERT INTO pumps (train_id, code, name, kind) VALUES ($1, 'ras1', 'RAS 1', 'ras') RETURNING id) INSERT INTO pump_versions (pump_id, effective_from, capacity_m3h) SELECT id, now(), 800 FROM u`, [train]);

    const { Aedes } = await import('aedes');
    const b = await Aedes.createBroker();
    broker = b;
    brokerServer = net.createServer(b.handle);
    brokerPort = await listen(brokerServer);

    const pki = path.join(h.ctx.config.dataDir, 'pki', 'test-server');
    const port = await closedPort();
    opcua = new OPCUAServer({
      port,
      host: '127.0.0.1',
      hostname: '127.0.0.1',
      resourcePath: '/wiring',
      serverCertificateManager: new OPCUACertificateManager({ rootFolder: path.join(pki, 'server'), automaticallyAcceptUnknownCertificate: true }),
      userCertificateManager: new OPCUACertificateManager({ rootFolder: path.join(pki, 'user'), automaticallyAcceptUnknownCertificate: true }),
    });
    await opcua.initialize();
    const ns = opcua.engine.addressSpace!.getOwnNamespace();
    const folder = ns.addFolder(opcua.engine.addressSpace!.rootFolder.objects, { browseName: 'Works', nodeId: 's=Works' });
    const basin = ns.addObject({ organizedBy: folder, browseName: 'Basin1', nodeId: 's=Works.Basin1' });
    const mlss = ns.addVariable({ componentOf: basin, browseName: 'MLSS', nodeId: 's=Works.Basin1.MLSS', dataType: 'Double', minimumSamplingInterval: 100 });
    mlss.setValueFromSource({ dataType: DataType.Double, value: 3.2 }, StatusCodes.Good);
    ns.addVariable({ componentOf: basin, browseName: 'Running', nodeId: 's=Works.Basin1.Running', dataType: 'Boolean', minimumSamplingInterval: 100 });
    await opcua.start();
    opcuaUrl = `opc.tcp://127.0.0.1:${port}/wiring`;
  });

  afterAll(async () => {
    await opcua?.shutdown(0);
    await new Promise<void>((r) => (brokerServer ? brokerServer.close(() => r()) : r()));
    await new Promise<void>((r) => (broker ? broker.close(() => r()) : r()));
    await h?.close();
  });

  const mqttSource = (over: object = {}) => integ.post(`/api/v1/plants/${plant}/sources`).send({ name: 'broker', kind: 'mqtt', url: `mqtt://127.0.0.1:${brokerPort}`, username: 'ingest', password: SECRET, options: { protocolVersion: 4 }, ...over });

  it('sources: create, list, patch, delete — the password is stored but never in any answer; writes audited', async () => {
    const made = await mqttSource();
    expect(made.status).toBe(201);
    const src = sourceOut.parse(made.body);
    expect(src).toMatchObject({ plantId: plant, kind: 'mqtt', username: 'ingest', hasSecret: true, enabled: true, tags: 0, options: { protocolVersion: 4 } });
    expect(made.text).not.toContain(SECRET);
    expect((await q(`SELECT secret FROM sources WHERE id = $1`, [src.id])).rows[0].secret).toBe(SECRET);

    const list = await integ.get(`/api/v1/plants/${plant}/sources`);
    expect(list.status).toBe(200);
    expect(list.body.sources.map((s: { name: string }) => s.name)).toEqual(['broker']);
    expect(list.text).not.toContain(SECRET);

    const dup = await mqttSource({ password: undefined });
    expect(dup.status).toBe(409);
    expect(dup.body.error.message).toMatch(/already has a source named "broker"/);

    const renamed = await integ.patch(`/api/v1/sources/${src.id}`).send({ name: 'broker-a', enabled: false });
    expect(renamed.status).toBe(200);
    expect(renamed.body).toMatchObject({ name: 'broker-a', enabled: false, hasSecret: true });
    expect(renamed.text).not.toContain(SECRET);
    const cleared = await integ.patch(`/api/v1/sources/${src.id}`).send({ password: null, enabled: true });
    expect(cleared.body.hasSecret).toBe(false);
    expect((await q(`SELECT secret FROM sources WHERE id = $1`, [src.id])).rows[0].secret).toBeNull();

    const audits = await q(`SELECT action, details::text AS d FROM audit_log WHERE target = $1 ORDER BY id`, [`source:${src.id}`]);
    expect(audits.rows.map((r) => r.action)).toEqual(['source.create', 'source.update', 'source.update']);
    expect(audits.rows.map((r) => r.d).join(' ')).not.toContain(SECRET);
    expect(audits.rows[2].d).toContain('removed');

    expect((await integ.delete(`/api/v1/sources/${src.id}`)).status).toBe(200);
    expect((await integ.delete(`/api/v1/sources/${src.id}`)).status).toBe(404);
    expect((await q(`SELECT action FROM audit_log WHERE target = $1 ORDER BY id DESC LIMIT 1`, [`source:${src.id}`])).rows[0].action).toBe('source.delete');
  });

  it('sources: URL per kind, OPC UA security pairs, unknown options and kind changes are 422 with the field; operators get 403', async () => {
    const bad: Array<[object, string]> = [
      [{ kind: 'mqtt', url: 'opc.tcp://127.0.0.1:4840' }, 'url'],
      [{ kind: 'opcua', url: 'mqtt://127.0.0.1:1883' }, 'url'],
      [{ kind: 'mqtt', url: 'not a url' }, 'url'],
      [{ kind: 'mqtt', url: 'mqtt://user:pw@127.0.0.1:1883' }, 'url'],
      [{ kind: 'opcua', url: 'opc.tcp://127.0.0.1:4840', options: { securityMode: 'SignAndEncrypt' } }, 'options.securityPolicy'],
      [{ kind: 'opcua', url: 'opc.tcp://127.0.0.1:4840', options: { securityMode: 'None', securityPolicy: 'Basic256Sha256' } }, 'options.securityPolicy'],
      [{ kind: 'mqtt', url: 'mqtt://127.0.0.1:1883', options: { protocolVersion: 3 } }, 'options.protocolVersion'],
      [{ kind: 'mqtt', url: 'mqtt://127.0.0.1:1883', options: { securityMode: 'None' } }, 'options'],
      [{ kind: 'modbus', url: 'tcp://127.0.0.1:502' }, 'kind'],
    ];
    for (const [body, field] of bad) {
      const r = await integ.post(`/api/v1/plants/${plant}/sources`).send({ name: 'x', ...body });
      expect(r.status, JSON.stringify(body)).toBe(422);
      expect(Object.keys(r.body.error.fields), JSON.stringify(body)).toContain(field);
    }
    const ok = ['mqtts://127.0.0.1:8883', 'ws://127.0.0.1:8080/mqtt', 'wss://127.0.0.1/mqtt'];
    for (const [i, url] of ok.entries()) expect((await integ.post(`/api/v1/plants/${plant}/sources`).send({ name: `ok-${i}`, kind: 'mqtt', url })).status, url).toBe(201);
    const ua = await integ.post(`/api/v1/plants/${plant}/sources`).send({ name: 'ua-x', kind: 'opcua', url: 'opc.tcp://127.0.0.1:4840', options: { securityMode: 'SignAndEncrypt', securityPolicy: 'Basic256Sha256' } });
    expect(ua.status).toBe(201);
    const kindChange = await integ.patch(`/api/v1/sources/${ua.body.id}`).send({ kind: 'mqtt' });
    expect(kindChange.status).toBe(422);
    const wrongUrl = await integ.patch(`/api/v1/sources/${ua.body.id}`).send({ url: 'mqtt://127.0.0.1:1883' });
    expect(wrongUrl.status).toBe(422);
    expect(wrongUrl.body.error.fields.url[0]).toMatch(/opc\.tcp/);
    const wrongOpts = await integ.patch(`/api/v1/sources/${ua.body.id}`).send({ options: { protocolVersion: 5 } });
    expect(wrongOpts.status).toBe(422);
    expect((await operator.post(`/api/v1/plants/${plant}/sources`).send({ name: 'y', kind: 'mqtt', url: 'mqtt://127.0.0.1:1883' })).status).toBe(403);
    expect((await integ.post(`/api/v1/plants/999999/sources`).send({ name: 'y', kind: 'mqtt', url: 'mqtt://127.0.0.1:1883' })).status).toBe(404);
  });

  it('test connection: MQTT against a live broker → ok; against a closed port → ok:false with the error, not 500', async () => {
    const live = await mqttSource({ name: 'live', options: {} });
    const r = await integ.post(`/api/v1/sources/${live.body.id}/test`);
    expect(r.status).toBe(200);
    expect(r.body.ok, JSON.stringify(r.body)).toBe(true);
    expect(r.body.latency_ms).toBeGreaterThanOrEqual(0);
    expect(r.body.latency_ms).toBeLessThan(5000);
    expect(r.body.details.protocolVersion).toMatch(/^(5\.0|3\.1\.1)$/);

    const dead = await mqttSource({ name: 'dead', url: `mqtt://127.0.0.1:${await closedPort()}` });
    const t0 = Date.now();
    const d = await integ.post(`/api/v1/sources/${dead.body.id}/test`);
    expect(d.status).toBe(200);
    expect(d.body.ok).toBe(false);
    expect(d.body.error).toMatch(/ECONNREFUSED|connect/i);
    expect(Date.now() - t0).toBeLessThan(6000);
    expect((await integ.post('/api/v1/sources/999999/test')).status).toBe(404);
  });

  it('test connection and browse: OPC UA against a server started here → session opens, children listed with class, children flag and data type', async () => {
    const made = await integ.post(`/api/v1/plants/${plant}/sources`).send({ name: 'ua', kind: 'opcua', url: opcuaUrl });
    expect(made.status).toBe(201);
    const id = made.body.id;
    const t = await integ.post(`/api/v1/sources/${id}/test`);
    expect(t.status).toBe(200);
    expect(t.body.ok, JSON.stringify(t.body)).toBe(true);

    const root = browseOut.parse((await integ.get(`/api/v1/sources/${id}/browse`)).body);
    expect(root.nodeId).toBe('ns=0;i=85');
    const works = root.children.find((c) => c.browseName === '1:Works');
    expect(works).toMatchObject({ nodeId: 'ns=1;s=Works', nodeClass: 'Object', hasChildren: true });
    expect(root.children.find((c) => c.nodeId === 'ns=0;i=2253')).toMatchObject({ browseName: 'Server' });

    const basin = await integ.get(`/api/v1/sources/${id}/browse`).query({ nodeId: 'ns=1;s=Works.Basin1' });
    expect(basin.status).toBe(200);
    const kids = Object.fromEntries(basin.body.children.map((c: { browseName: string }) => [c.browseName, c]));
    expect(kids['1:MLSS']).toMatchObject({ nodeId: 'ns=1;s=Works.Basin1.MLSS', nodeClass: 'Variable', dataType: 'Double', displayName: 'MLSS' });
    expect(kids['1:Running']).toMatchObject({ dataType: 'Boolean' });

    expect((await integ.get(`/api/v1/sources/${id}/browse`).query({ nodeId: 'ns=1;s=Nope' })).status).toBe(404);
    expect((await integ.get(`/api/v1/sources/${id}/browse`).query({ nodeId: 'garbage;;' })).status).toBe(422);

    // Signed and encrypted channel: our client certificate (created under the data folder) and the server's.
    const secure = await integ.post(`/api/v1/plants/${plant}/sources`).send({ name: 'ua-secure', kind: 'opcua', url: opcuaUrl, options: { securityMode: 'SignAndEncrypt', securityPolicy: 'Basic256Sha256', acceptUnknownServerCertificate: true } });
    const st = await integ.post(`/api/v1/sources/${secure.body.id}/test`);
    expect(st.body.ok, JSON.stringify(st.body)).toBe(true);
    expect(fs.existsSync(path.join(h.ctx.config.dataDir, 'pki', 'opcua-client', 'own', 'certs', 'client_certificate.pem'))).toBe(true);

    const down = await integ.post(`/api/v1/plants/${plant}/sources`).send({ name: 'ua-down', kind: 'opcua', url: `opc.tcp://127.0.0.1:${await closedPort()}` });
    const dt = await integ.post(`/api/v1/sources/${down.body.id}/test`);
    expect(dt.status).toBe(200);
    expect(dt.body.ok).toBe(false);
    expect(dt.body.error).toBeTruthy();
    expect((await integ.get(`/api/v1/sources/${down.body.id}/browse`)).status).toBe(502);
  });

  it('discovery: empty list with a note before ingest listed topics, the rows of mqtt_discovery once it has; 422 for an OPC UA source', async () => {
    const src = await mqttSource({ name: 'disc' });
    const empty = await integ.get(`/api/v1/sources/${src.body.id}/discovery`);
    expect(empty.status).toBe(200);
    expect(empty.body).toMatchObject({ topics: [], asOf: null });
    expect(empty.body.note).toMatch(/not listed topics/);
    await q(
      `INSERT INTO mqtt_discovery (source_id, topic, last_payload, first_seen, last_seen, count, tag_id) VALUES
       ($1, 'alder/ab1/mlss', '{"v":3.1}', '2026-02-28T00:00:00Z', '2026-03-01T00:00:00Z', 12, NULL),
       ($1, 'alder/ab1/do', '1.9', '2026-02-28T00:00:00Z', '2026-03-01T00:00:05Z', 3, NULL)`,
      [src.body.id],
    );
    const full = await integ.get(`/api/v1/sources/${src.body.id}/discovery`);
    expect(full.body.topics).toEqual([
      { topic: 'alder/ab1/do', lastPayload: '1.9', firstSeen: '2026-02-28T00:00:00.000Z', lastSeen: '2026-03-01T00:00:05.000Z', count: 3, tagId: null },
      { topic: 'alder/ab1/mlss', lastPayload: '{"v":3.1}', firstSeen: '2026-02-28T00:00:00.000Z', lastSeen: '2026-03-01T00:00:00.000Z', count: 12, tagId: null },
    ]);
    expect(full.body.asOf).toBe('2026-03-01T00:00:05.000Z');
    const ua = await integ.post(`/api/v1/plants/${plant}/sources`).send({ name: 'ua-disc', kind: 'opcua', url: 'opc.tcp://127.0.0.1:4840' });
    expect((await integ.get(`/api/v1/sources/${ua.body.id}/discovery`)).status).toBe(422);
  });

  describe('tags and signal map', () => {
    let mqttId: number;
    let uaId: number;
    beforeAll(async () => {
      mqttId = (await mqttSource({ name: 'tags-mqtt' })).body.id;
      uaId = (await integ.post(`/api/v1/plants/${plant}/sources`).send({ name: 'tags-ua', kind: 'opcua', url: 'opc.tcp://127.0.0.1:4841' })).body.id;
    });
    const tag = (over: object = {}) => integ.post(`/api/v1/plants/${plant}/tags`).send({ name: 'AB1 MLSS', sourceId: mqttId, address: 'alder/ab1/mlss', unit: 'g/L', rangeLow: 0, rangeHigh: 12, ...over });

    it('tags: create, config view, patch, 409 for duplicate name or address, 422 for bad ranges and addresses', async () => {
      const made = await tag({ scaleGain: 0.001, deadband: 0.01 });
      expect(made.status).toBe(201);
      const t = tagConfigOut.parse(made.body);
      expect(t).toMatchObject({ name: 'AB1 MLSS', source: { id: mqttId, kind: 'mqtt' }, scaleGain: 0.001, scaleOffset: 0, deadband: 0.01, expectedPeriod_s: 10, rangeLow: 0, rangeHigh: 12, enabled: true, signals: [] });

      const dupName = await tag({ address: 'alder/ab1/other' });
      expect(dupName.status).toBe(409);
      expect(dupName.body.error.message).toMatch(/tag named "AB1 MLSS"/);
      const dupAddr = await tag({ name: 'Other' });
      expect(dupAddr.status).toBe(409);
      expect(dupAddr.body.error.message).toMatch(/address "alder\/ab1\/mlss"/);

      const cases: Array<[object, string]> = [
        [{ name: 'r', address: 'a/r', rangeLow: 5, rangeHigh: 5 }, 'rangeHigh'],
        [{ name: 'w', address: 'a/#/b' }, 'address'],
        [{ name: 'w2', address: 'a/b+' }, 'address'],
        [{ name: 'n', sourceId: uaId, address: 'Works.Basin1.MLSS' }, 'address'],
        [{ name: 'p', address: 'a/p', expectedPeriod_s: 0 }, 'expectedPeriod_s'],
        [{ name: 'd', address: 'a/d', deadband: -1 }, 'deadband'],
        [{ name: 's', address: 'a/s', sourceId: 999999 }, 'sourceId'],
      ];
      for (const [body, field] of cases) {
        const r = await tag(body);
        expect(r.status, JSON.stringify(body)).toBe(422);
        expect(Object.keys(r.body.error.fields), JSON.stringify(body)).toContain(field);
      }
      expect((await tag({ name: 'UA MLSS', sourceId: uaId, address: 'ns=1;s=Works.Basin1.MLSS', samplingInterval_ms: 500 })).status).toBe(201);

      const patched = await integ.patch(`/api/v1/tags/${t.id}`).send({ rangeHigh: 15, description: 'probe in AB1' });
      expect(patched.status).toBe(200);
      expect(patched.body).toMatchObject({ rangeHigh: 15, description: 'probe in AB1' });
      const crossed = await integ.patch(`/api/v1/tags/${t.id}`).send({ rangeLow: 20 });
      expect(crossed.status).toBe(422);
      expect(crossed.body.error.fields.rangeHigh[0]).toMatch(/below/);
      const list = await integ.get(`/api/v1/plants/${plant}/tags/config`);
      expect(list.status).toBe(200);
      expect(list.body.tags.map((x: { name: string }) => x.name)).toEqual(['AB1 MLSS', 'UA MLSS']);
      expect((await q(`SELECT count(*)::int n FROM audit_log WHERE target = $1`, [`tag:${t.id}`])).rows[0].n).toBe(2);
      const srcs = (await integ.get(`/api/v1/plants/${plant}/sources`)).body.sources as Array<{ id: number; tags: number }>;
      expect(srcs.find((x) => x.id === mqttId)!.tags).toBe(1);
      expect(srcs.find((x) => x.id === uaId)!.tags).toBe(1);
    });

    it('signal map: kind must fit the target type, target by code or id, a second PUT replaces the tag; delete', async () => {
      const a = (await tag({ name: 'Flow A', address: 'alder/ras1/flow', unit: 'm3/h', rangeHigh: 2000 })).body.id;
      const b = (await tag({ name: 'Flow B', address: 'alder/ras1/flow2', unit: 'm3/h', rangeHigh: 2000 })).body.id;
      const put = (body: object) => integ.put(`/api/v1/plants/${plant}/signal-map`).send(body);

      const wrongType = await put({ signal: 'pump.flow', targetType: 'basin', targetCode: 'ab1', tagId: a });
      expect(wrongType.status).toBe(422);
      expect(wrongType.body.error.fields.targetType[0]).toMatch(/pump signal/);
      const noTarget = await put({ signal: 'pump.flow', targetType: 'pump', targetCode: 'zz9', tagId: a });
      expect(noTarget.status).toBe(422);
      expect(noTarget.body.error.fields.targetCode[0]).toMatch(/ras1/);
      const otherTag = (await q(`INSERT INTO sources (plant_id, name, kind, url) VALUES ($1, 's', 'mqtt', 'mqtt://127.0.0.1:1') RETURNING id`, [other])).rows[0].id;
      const foreign = (await q(`INSERT INTO tags (plant_id, source_id, name, address, unit) VALUES ($1, $2, 'f', 'f', 'm3/h') RETURNING id`, [other, otherTag])).rows[0].id;
      expect((await put({ signal: 'pump.flow', targetType: 'pump', targetCode: 'ras1', tagId: foreign })).body.error.fields).toHaveProperty('tagId');

      const first = await put({ signal: 'pump.flow', targetType: 'pump', targetCode: 'ras1', tagId: a });
      expect(first.status).toBe(200);
      expect(first.body).toMatchObject({ signal: 'pump.flow', targetType: 'pump', targetCode: 'ras1', tagId: a, replacedTagId: null });
      const second = await put({ signal: 'pump.flow', targetType: 'pump', targetId: first.body.targetId, tagId: b });
      expect(second.body).toMatchObject({ id: first.body.id, tagId: b, replacedTagId: a });
      expect((await q(`SELECT count(*)::int n FROM signal_map WHERE plant_id = $1 AND signal = 'pump.flow'`, [plant])).rows[0].n).toBe(1);
      const plantFlow = await put({ signal: 'plant.influentFlow', targetType: 'plant', tagId: a });
      expect(plantFlow.body).toMatchObject({ targetType: 'plant', targetId: plant, targetCode: 'alder' });

      const cfg = await integ.get(`/api/v1/plants/${plant}/tags/config`);
      const flowB = cfg.body.tags.find((x: { id: number }) => x.id === b);
      expect(flowB.signals).toEqual([expect.objectContaining({ signal: 'pump.flow', targetCode: 'ras1' })]);

      expect((await integ.delete(`/api/v1/signal-map/${second.body.id}`)).status).toBe(200);
      expect((await integ.delete(`/api/v1/signal-map/${second.body.id}`)).status).toBe(404);
      expect((await q(`SELECT action FROM audit_log WHERE target = $1 ORDER BY id`, [`signal_map:${first.body.id}`])).rows.map((r) => r.action)).toEqual(['signal_map.put', 'signal_map.put', 'signal_map.delete']);

      // A source with tags is not deleted by accident.
      const del = await integ.delete(`/api/v1/sources/${mqttId}`);
      expect(del.status).toBe(409);
      expect(del.body.error.message).toMatch(/force=1/);
      expect((await integ.delete(`/api/v1/tags/${a}`)).status).toBe(200);
      expect((await q(`SELECT count(*)::int n FROM signal_map WHERE tag_id = $1`, [a])).rows[0].n).toBe(0);
    });

    it('CSV import: dry run previews rows and row errors without writing; a real import is all or nothing', async () => {
      const count = async () => (await q(`SELECT count(*)::int n FROM tags WHERE plant_id = $1`, [plant])).rows[0].n as number;
      const upload = (csv: string, dry = false) => integ.post(`/api/v1/plants/${plant}/tags/import${dry ? '?dryRun=1' : ''}`).set('Content-Type', 'text/csv').send(csv);
      const header = 'name,source,address,unit,description,scale_gain,scale_offset,deadband,expected_period_s,range_low,range_high,signal,target';
      const bad = [
        header,
        'FC1 blanket,tags-mqtt,alder/fc1/blanket,m,"sludge blanket, sonar",1,0,0.05,30,0,4,clarifier.blanketLevel,fc1',
        'FC1 underflow,nowhere,alder/fc1/uf,g/L,,1,0,0,10,20,0,clarifier.underflowTss,fc1',
        'AB1 flow,tags-mqtt,alder/ab1/flow,m3/h,,abc,0,0,10,5,1,basin.influentFlow,fc1',
        'FC1 blanket,tags-mqtt,alder/fc1/blanket,m,,1,0,0,30,0,4,,',
      ].join('\r\n');
      const before = await count();
      const dry = await upload(bad, true);
      expect(dry.status).toBe(200);
      const preview = tagImportOut.parse(dry.body);
      expect(preview).toMatchObject({ dryRun: true, ok: false, imported: 0 });
      expect(preview.rows[0]).toMatchObject({ line: 2, name: 'FC1 blanket', source: 'tags-mqtt', sourceId: mqttId, description: 'sludge blanket, sonar', deadband: 0.05, expectedPeriod_s: 30, signal: 'clarifier.blanketLevel', target: 'fc1' });
      expect(Object.keys(preview.errors).sort()).toEqual(['line.3.range_high', 'line.3.source', 'line.4.range_high', 'line.4.scale_gain', 'line.4.target', 'line.5.address', 'line.5.name']);
      expect(preview.errors['line.5.name']![0]).toMatch(/line 2/);
      // A text in a number column is named in the column's words, and the row's other errors
      // (range 5 … 1) are still found beside it.
      expect(preview.errors['line.4.scale_gain']).toEqual(['scale_gain must be a number in plain decimal notation, like 0.5 or -12 (got "abc")']);
      expect(await count()).toBe(before);

      const real = await upload(bad);
      expect(real.status).toBe(422);
      expect(real.body.error.message).toMatch(/^3 of 4 rows have errors/);
      expect(real.body.error.fields).toEqual(preview.errors);
      expect(await count()).toBe(before);

      const good = [header, bad.split('\r\n')[1], 'RAS1 running,tags-mqtt,alder/ras1/run,1,,1,0,0,10,,,pump.running,ras1', 'UA MLSS 2,tags-ua,ns=1;s=Works.Basin1.MLSS2,g/L,,,,,,,,basin.mlss,ab1'].join('\n');
      const okDry = tagImportOut.parse((await upload(good, true)).body);
      expect(okDry).toMatchObject({ ok: true, errors: {}, mappings: 3, imported: 0 });
      expect(await count()).toBe(before);
      const stored = await upload(good);
      expect(stored.status).toBe(201);
      expect(stored.body).toMatchObject({ dryRun: false, ok: true, imported: 3, mappings: 3 });
      expect(await count()).toBe(before + 3);
      const maps = await q(`SELECT signal, target_type FROM signal_map WHERE tag_id = ANY($1) ORDER BY signal`, [stored.body.tagIds]);
      expect(maps.rows).toEqual([
        { signal: 'basin.mlss', target_type: 'basin' },
        { signal: 'clarifier.blanketLevel', target_type: 'clarifier' },
        { signal: 'pump.running', target_type: 'pump' },
      ]);
      expect((await q(`SELECT details FROM audit_log WHERE action = 'tag.import' ORDER BY id DESC LIMIT 1`)).rows[0].details).toMatchObject({ rows: 3, mappings: 3 });
      // The same file again: every name exists now → nothing new.
      const again = await upload(good);
      expect(again.status).toBe(422);
      expect(Object.keys(again.body.error.fields)).toEqual(expect.arrayContaining(['line.2.name', 'line.3.name', 'line.4.name']));
      expect(await count()).toBe(before + 3);

      const header2 = await upload('name,source,addr,unit\nx,tags-mqtt,a,m');
      expect(header2.status).toBe(422);
      expect(header2.body.error.fields['line.1'][0]).toMatch(/unknown column\(s\) addr; missing column\(s\) address/);
      expect((await integ.post(`/api/v1/plants/${plant}/tags/import`).send({ csv: 'x' })).status).toBe(415);
      expect((await upload(`${header}\n${'x,'.repeat(600_000)}`)).status).toBe(413);
      expect((await operator.post(`/api/v1/plants/${plant}/tags/import`).set('Content-Type', 'text/csv').send(good)).status).toBe(403);
    });
  });

  it('ingest status: running while a worker heartbeat is younger than three periods, running:false with the reason when none or stale; several workers; dead letters counted from the table', async () => {
    const analyst = await h.agent('analyst');
    await q(`DELETE FROM ingest_workers`);
    const missing = await analyst.get('/api/v1/ingest/status');
    expect(missing.status).toBe(200);
    expect(missing.body).toMatchObject({ running: false, sources: [], heartbeatAt: null, workers: [] });
    expect(missing.body.reason).toMatch(/no ingest worker has written a heartbeat/);

    // A row first seen 3 h ago and seen again 2 more times, the latest 10 min ago, counts in the last hour.
    await q(`INSERT INTO dead_letters (ts, source_id, address, payload, reason) VALUES (now() - interval '2 hours', NULL, 'a', 'x', 'old'), (now(), NULL, 'a', 'y', 'new'), (now(), NULL, 'b', 'z', 'new')`);
    await q(`INSERT INTO dead_letters (ts, last_seen_at, times_seen, source_id, address, payload, reason, delivery_key) VALUES (now() - interval '3 hours', now() - interval '10 minutes', 3, NULL, 'a', 'v', 'again', 'k1')`);
    const status = {
      samplesPerSec: 180,
      lagMs: 35,
      spool: { bytes: 2048, files: 1 },
      writer: { committedSamples: 10_800, spooledSamples: 40 },
      sources: [{ sourceId: 7, name: 'broker', kind: 'mqtt', state: 'connected', lastError: null, connectedAt: null, lastMessageAt: null, messages: 5, samples: 5, unmapped: 0, deadLetters: 2, suppressed: 0, unacknowledged: 0, tags: 3, staleTags: 0, reconnects: 1, details: {} }],
      loadError: null,
    };
    // Heartbeat ages are set on the database's clock, as ingest writes them (heartbeat_at = now()).
    const worker = (id: string, ageS: number, st: object = status, host = 'ingest-a') =>
      q(
        `INSERT INTO ingest_workers (id, host, pid, started_at, heartbeat_at, heartbeat_ms, status) VALUES ($1, $2, 4242, now() - interval '60 s', now() - make_interval(secs => $3), 2000, $4)
         ON CONFLICT (id) DO UPDATE SET heartbeat_at = excluded.heartbeat_at, status = excluded.status`,
        [id, host, ageS, JSON.stringify(st)],
      );
    await worker('w1', 1);
    const fresh = ingestStatusOut.parse((await analyst.get('/api/v1/ingest/status')).body);
    expect(fresh).toMatchObject({ running: true, pid: 4242, samplesPerSec: 180, lagMs: 35, spool: { bytes: 2048, files: 1 }, deadLetters: { lastHour: 3, total: 4, repeats: 2 } });
    expect(fresh.reason).toBeUndefined();
    expect(fresh.sources[0]).toMatchObject({ sourceId: 7, state: 'connected', reconnects: 1 });
    expect(fresh.workers).toEqual([expect.objectContaining({ id: 'w1', host: 'ingest-a', running: true, heartbeat_ms: 2000, sourceIds: [7], sources: 1, messages: 5, samples: 5 })]);

    // Three periods of 2 s: 5 s old still runs, 7 s old does not.
    await worker('w1', 5);
    expect((await analyst.get('/api/v1/ingest/status')).body).toMatchObject({ running: true });
    await worker('w1', 15);
    const stale = await analyst.get('/api/v1/ingest/status');
    expect(stale.body).toMatchObject({ running: false, pid: 4242, samplesPerSec: 180, workers: [expect.objectContaining({ id: 'w1', running: false })] });
    expect(stale.body.reason).toMatch(/heartbeat is 15 s old \(more than 3 periods, 6 s\)/);
    // Shown stale for ten periods (20 s), then left out of the list (the reason still says why).
    await worker('w1', 25);
    expect((await analyst.get('/api/v1/ingest/status')).body).toMatchObject({ running: false, workers: [] });
    await worker('w1', 15);

    // A second worker on another host: rates add up, the worst lag counts, both are listed; the stale one's sources are not shown.
    await worker('w2', 0, { ...status, samplesPerSec: 20, lagMs: 90, sources: [{ ...status.sources[0], sourceId: 8 }] }, 'ingest-b');
    await worker('w3', 1, { ...status, samplesPerSec: 30, lagMs: 10, spool: { bytes: 0, files: 0 }, sources: [] }, 'ingest-c');
    const two = ingestStatusOut.parse((await analyst.get('/api/v1/ingest/status')).body);
    expect(two).toMatchObject({ running: true, samplesPerSec: 50, lagMs: 90, spool: { bytes: 2048, files: 1 } });
    expect(two.sources.map((x) => x.sourceId)).toEqual([8]);
    expect(two.workers.map((w) => [w.id, w.running])).toEqual([
      ['w2', true],
      ['w3', true],
      ['w1', false],
    ]);
    await q(`DELETE FROM ingest_workers WHERE id <> 'w1'`);
    await worker('w1', 1);

    // A token scoped to another plant sees neither this plant's sources in the status nor their dead letters.
    const ours = (await mqttSource({ name: 'scoped' })).body.id;
    await q(`INSERT INTO dead_letters (source_id, address, payload, reason) VALUES ($1, 'c', 'w', 'ours')`, [ours]);
    await worker('w1', 1, { ...status, sources: [{ ...status.sources[0], sourceId: ours }] });
    const made = await integ.post('/api/v1/tokens').send({ name: 'other-plant', role: 'integrator', expiresInDays: 1, plantIds: [other] });
    expect(made.status).toBe(201);
    const bearer = { Authorization: `Bearer ${made.body.token}` };
    const scoped = await request(h.app).get('/api/v1/ingest/status').set(bearer);
    expect(scoped.body).toMatchObject({ running: true, sources: [], deadLetters: { lastHour: 0, total: 0, repeats: 0 } });
    expect((await analyst.get('/api/v1/ingest/status')).body).toMatchObject({ sources: [expect.objectContaining({ sourceId: ours })], deadLetters: { lastHour: 4, total: 5, repeats: 2 } });
    expect((await request(h.app).get(`/api/v1/sources/${ours}`).set(bearer)).status).toBe(403);
    expect((await request(h.app).patch(`/api/v1/sources/${ours}`).set(bearer).send({ enabled: false })).status).toBe(403);
    expect((await request(h.app).get(`/api/v1/plants/${plant}/tags/config`).set(bearer)).status).toBe(403);
    const own = await integ.get(`/api/v1/sources/${ours}`);
    expect(own.body).toMatchObject({ id: ours, name: 'scoped', hasSecret: true });
    expect(own.text).not.toContain(SECRET);

    // A row this API cannot read (another ingest version) still counts as a heartbeat, without figures.
    await worker('w1', 1, { version: 'future' });
    expect((await analyst.get('/api/v1/ingest/status')).body).toMatchObject({ running: true, samplesPerSec: null, sources: [], workers: [expect.objectContaining({ id: 'w1', samplesPerSec: null })] });
    expect((await request(h.app).get('/api/v1/ingest/status')).status).toBe(401);
  });
});
