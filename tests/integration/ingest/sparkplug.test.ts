import mqtt, { type MqttClient } from 'mqtt';
import pg from 'pg';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { IngestService } from '../../../ingest/ingest-service.ts';
import { QUALITY_FLAG, QUALITY_GRADE } from '../../../shared/contracts/sample-quality.ts';
import { sparkplugStatus, type SparkplugStatus } from '../../../shared/contracts/wiring.ts';
import { createTestDatabase, type TestDatabase } from '../../helpers/db.ts';
import { TestEdgeNode, decodeCommand, type EdgeMessage } from '../../helpers/sparkplug-edge-node.ts';
import { freePort, ingestConfig, scalar, seedWiring, silentLog, startTestBroker, tempDir, waitFor, type TestBroker } from './helpers.ts';

// Sparkplug B end to end (Eclipse Sparkplug 3.0.0): a test edge node built with the same package
// publishes births, data by alias, a seq gap and deaths through the ingest tests' embedded broker;
// what ingest stores, dead-letters and publishes is checked exactly.

const T0 = Date.UTC(2026, 0, 20, 6, 0, 0);
const BAD_FROM_SOURCE = QUALITY_GRADE.bad | QUALITY_FLAG.sourceStatus;

describe('Sparkplug B → PostgreSQL', () => {
  let t: TestDatabase;
  let pool: pg.Pool;
  let broker: TestBroker;
  let svc: IngestService;
  let edge: MqttClient;
  let spy: MqttClient;
  let marker: MqttClient;
  /** Every NCMD the spy saw, in order. */
  const ncmds: { topic: string; payload: Buffer }[] = [];
  let quiet: { sourceId: number; tagIds: number[] };
  let asking: { sourceId: number; tagIds: number[] };
  const dataDir = tempDir('sparkplug-it');

  const sp = (sourceId: number): SparkplugStatus | undefined => {
    const d = svc.status().sources.find((s) => s.sourceId === sourceId)?.details.sparkplug;
    return d === undefined ? undefined : sparkplugStatus.parse(d);
  };
  /** Sparkplug requires QoS 0 and retain false for births, data and deaths (§4.2, tck-id-topics-*-mqtt). */
  const send = (m: EdgeMessage) => edge.publishAsync(m.topic, m.payload, { qos: 0, retain: false });

  /**
   * Everything ingest might have published in answer to what it has handled is already with the
   * broker: a rebirth request is published synchronously while its message is handled. A marker
   * NCMD sent now reaches the spy after any of them (aedes forwards in arrival order).
   */
  async function settleCommands(): Promise<void> {
    const topic = `spBv1.0/marker/NCMD/m${ncmds.length}-${Date.now()}`;
    await marker.publishAsync(topic, Buffer.from('marker'), { qos: 1 });
    await waitFor('marker NCMD at the spy', async () => ncmds.some((c) => c.topic === topic), (x) => x, 10_000);
  }
  const fromIngest = () => ncmds.filter((c) => !c.topic.startsWith('spBv1.0/marker/'));

  beforeAll(async () => {
    t = await createTestDatabase();
    pool = new pg.Pool({ connectionString: t.url, max: 3 });
    broker = await startTestBroker(await freePort());
    quiet = await seedWiring(t.url, {
      kind: 'mqtt',
      sourceUrl: broker.url,
      options: { topics: ['spBv1.0/kestrel/#'] },
      addresses: ['kestrel/KB1//Basin 1/MLSS', 'kestrel/KB1/RAS1/Flow', 'kestrel/KB1/RAS1/Running'],
    });
    asking = await seedWiring(t.url, { kind: 'mqtt', sourceUrl: broker.url, options: { topics: ['spBv1.0/heron/#'], payload: 'sparkplugB', requestRebirth: true }, addresses: ['heron/HB9//Level'] });
    spy = await mqtt.connectAsync(broker.url, { clientId: 'it-ncmd-spy', protocolVersion: 4 });
    spy.on('message', (topic, payload) => ncmds.push({ topic, payload }));
    await spy.subscribeAsync('spBv1.0/+/NCMD/#', { qos: 1 });
    marker = await mqtt.connectAsync(broker.url, { clientId: 'it-marker', protocolVersion: 4 });
    svc = await IngestService.start(ingestConfig(t.url, dataDir), silentLog);
    await waitFor('both sources connected', async () => svc.status().sources.filter((s) => s.state === 'connected').length, (n) => n === 2);
    // QoS 0 publishes are only delivered once ingest's subscriptions are in place: probe with
    // DCMD messages (commands carry no measurements: ingest counts and ignores them) until both
    // sources have seen one.
    await waitFor(
      'subscriptions in place',
      async () => {
        for (const g of ['kestrel', 'heron']) await marker.publishAsync(`spBv1.0/${g}/DCMD/probe/x`, Buffer.from('probe'), { qos: 0 });
        return Math.min(sp(quiet.sourceId)?.messages ?? 0, sp(asking.sourceId)?.messages ?? 0);
      },
      (n) => n > 0,
      10_000,
      200,
    );
  });

  afterAll(async () => {
    for (const c of [edge, spy, marker]) await c?.endAsync(true).catch(() => {});
    await svc?.stop();
    await broker?.close();
    await pool?.end();
    await t?.drop();
  });

  it('stores births, aliased data and deaths exactly; counts the seq gap; publishes nothing by default', async () => {
    const node = new TestEdgeNode('kestrel', 'KB1', 1);
    const will = node.ndeath(T0);
    edge = await mqtt.connectAsync(broker.url, { clientId: 'it-edge-KB1', protocolVersion: 4, reconnectPeriod: 0, will: { topic: will.topic, payload: will.payload, qos: 1, retain: false } });

    // 1. Data before any birth (ingest started after the edge node's birth): dead-lettered, nothing guessed, nothing published.
    node.skipSeq(41);
    await send(node.ndata(T0 - 5_000, [{ alias: 10, type: 'Double', value: 9.99 }]));
    await waitFor('dead letter of the early NDATA', () => scalar(pool, `SELECT count(*) FROM dead_letters WHERE source_id = $1`, [quiet.sourceId]), (n) => n === 1);
    const dl = await pool.query(`SELECT address, reason, payload FROM dead_letters WHERE source_id = $1`, [quiet.sourceId]);
    expect(dl.rows[0].address).toBe('spBv1.0/kestrel/NDATA/KB1');
    expect(dl.rows[0].reason).toMatch(/^NDATA from edge node kestrel\/KB1 before any NBIRTH seen by ingest: metric aliases unknown, a rebirth is needed/);
    expect(JSON.parse(dl.rows[0].payload)).toMatchObject({ seq: 42, metrics: [{ alias: 10, type: 'Double', value: 9.99 }] });
    expect(sp(quiet.sourceId)?.needRebirth.map((n) => n.edgeNode)).toEqual(['kestrel/KB1']);
    await settleCommands();
    expect(fromIngest()).toEqual([]);

    // 2. Births define names, aliases, datatypes and units; then data by alias only, with a gap of two seq numbers.
    await send(node.nbirth(T0, [{ name: 'Basin 1/MLSS', alias: 10, type: 'Double', value: 3.1, timestamp: T0, properties: { engUnit: { type: 'String', value: 'g/L' } } }]));
    await send(
      node.dbirth('RAS1', T0 + 1, [
        { name: 'Flow', alias: 20, type: 'Float', value: 410, timestamp: T0 + 1, properties: { engUnit: { type: 'String', value: 'm3/h' } } },
        { name: 'Running', alias: 21, type: 'Boolean', value: true, timestamp: T0 + 1 },
      ]),
    );
    await send(node.ddata('RAS1', T0 + 10_000, [{ alias: 20, type: 'Float', value: 395.5, timestamp: T0 + 9_000 }]));
    node.skipSeq(2);
    await send(node.ndata(T0 + 12_000, [{ alias: 10, type: 'Double', value: 3.25, timestamp: T0 + 12_000 }]));
    await send(node.ddata('RAS1', T0 + 15_000, [{ alias: 21, type: 'Boolean', value: false }]));
    await send(node.ddeath('RAS1', T0 + 20_000));
    const [mlss, flow, running] = quiet.tagIds as [number, number, number];
    const rows = async (tagId: number) =>
      (await pool.query(`SELECT extract(epoch FROM ts) * 1000 AS ms, value, quality FROM samples WHERE tag_id = $1 ORDER BY ts`, [tagId])).rows.map((r) => [Number(r.ms), r.value, r.quality]);
    await waitFor('device death stored', async () => (await rows(running)).length, (n) => n === 3);
    expect(await rows(mlss)).toEqual([
      [T0, 3.1, 0],
      [T0 + 12_000, 3.25, 0],
    ]);
    // Float 395.5 is exact in binary32; 410 too.
    expect(await rows(flow)).toEqual([
      [T0 + 1, 410, 0],
      [T0 + 9_000, 395.5, 0],
      [T0 + 20_000, null, BAD_FROM_SOURCE],
    ]);
    expect(await rows(running)).toEqual([
      [T0 + 1, 1, 0],
      [T0 + 15_000, 0, 0],
      [T0 + 20_000, null, BAD_FROM_SOURCE],
    ]);
    // Seq: NBIRTH 0, DBIRTH 1, DDATA 2, (3 and 4 skipped), NDATA 5, DDATA 6, DDEATH 7 → two missing numbers.
    expect(sp(quiet.sourceId)?.seqGaps).toBe(2);
    expect(sp(quiet.sourceId)?.needRebirth).toEqual([]);

    // 3. The edge node's connection breaks: the broker publishes its Will, the NDEATH; every tag of the node goes bad at its receive time.
    const before = Date.now();
    (edge as unknown as { stream: { destroy(): void } }).stream.destroy();
    await waitFor('node death stored', async () => (await rows(mlss)).length, (n) => n === 3);
    const after = Date.now();
    for (const tagId of [mlss, flow, running]) {
      const last = (await rows(tagId)).at(-1)!;
      expect(last[1]).toBeNull();
      expect(last[2]).toBe(BAD_FROM_SOURCE);
      expect(last[0]).toBeGreaterThanOrEqual(before);
      expect(last[0]).toBeLessThanOrEqual(after);
    }
    expect(sp(quiet.sourceId)).toMatchObject({ deaths: 2, rebirthRequests: 0 });

    // Discovery lists each metric as an addressable tag with what the birth said of it.
    // A beat already under way may have drained before the last messages: the second one saves them.
    await svc.heartbeat();
    await svc.heartbeat();
    const disc = await pool.query(`SELECT topic, tag_id, last_payload FROM mqtt_discovery WHERE source_id = $1 `, [quiet.sourceId]);
    const byTopic = new Map(disc.rows.map((r) => [r.topic as string, r]));
    expect([...byTopic.keys()].sort()).toEqual(['kestrel/KB1//Basin 1/MLSS', 'kestrel/KB1//Node Control/Rebirth', 'kestrel/KB1//bdSeq', 'kestrel/KB1/RAS1/Flow', 'kestrel/KB1/RAS1/Running']);
    expect(byTopic.get('kestrel/KB1/RAS1/Flow')!.tag_id).toBe(flow);
    expect(JSON.parse(byTopic.get('kestrel/KB1/RAS1/Flow')!.last_payload)).toMatchObject({ type: 'Float', unit: 'm3/h', alias: 20 });
    expect(JSON.parse(byTopic.get('kestrel/KB1//Basin 1/MLSS')!.last_payload)).toMatchObject({ v: 3.25, type: 'Double', unit: 'g/L', alias: 10 });

    // Across all of it ingest published nothing.
    await settleCommands();
    expect(fromIngest()).toEqual([]);
  });

  it('with requestRebirth, sends exactly one rebirth command for an edge node whose aliases it does not know', async () => {
    const node = new TestEdgeNode('heron', 'HB9', 4);
    const c = await mqtt.connectAsync(broker.url, { clientId: 'it-edge-HB9', protocolVersion: 4 });
    try {
      node.skipSeq(100);
      for (let i = 0; i < 3; i++) await c.publishAsync(...toArgs(node.ndata(T0 + i * 1_000, [{ alias: 1, type: 'Double', value: i }])));
      await waitFor('three dead letters', () => scalar(pool, `SELECT count(*) FROM dead_letters WHERE source_id = $1`, [asking.sourceId]), (n) => n === 3);
      await settleCommands();
      // Three DATA within a minute: one request (once per node per minute).
      expect(fromIngest().map((x) => x.topic)).toEqual(['spBv1.0/heron/NCMD/HB9']);
      expect(decodeCommand(fromIngest()[0]!.payload)).toEqual([{ name: 'Node Control/Rebirth', value: true }]);
      expect(sp(asking.sourceId)).toMatchObject({ rebirthRequests: 1, needRebirth: [{ edgeNode: 'heron/HB9' }] });
      // The edge node answers with its births; its data is read from then on.
      await c.publishAsync(...toArgs(node.nbirth(T0 + 5_000, [{ name: 'Level', alias: 1, type: 'Double', value: 2.5, timestamp: T0 + 5_000 }])));
      await c.publishAsync(...toArgs(node.ndata(T0 + 6_000, [{ alias: 1, type: 'Double', value: 2.75 }])));
      const [level] = asking.tagIds as [number];
      await waitFor('level samples', () => scalar(pool, `SELECT count(*) FROM samples WHERE tag_id = $1`, [level]), (n) => n === 2);
      expect(await scalar(pool, `SELECT sum(value) FROM samples WHERE tag_id = $1`, [level])).toBe(5.25);
      expect(sp(asking.sourceId)?.needRebirth).toEqual([]);
      await settleCommands();
      expect(fromIngest()).toHaveLength(1);
    } finally {
      await c.endAsync(true).catch(() => {});
    }
  });
});

function toArgs(m: EdgeMessage): [string, Buffer, { qos: 0; retain: false }] {
  return [m.topic, m.payload, { qos: 0, retain: false }];
}
