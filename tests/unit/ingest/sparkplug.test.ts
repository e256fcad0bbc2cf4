import { describe, expect, it } from 'vitest';
import { MqttMessageHandler } from '../../../ingest/mqtt/message-handler.ts';
import { Discovery } from '../../../ingest/mqtt/discovery.ts';
import { REBIRTH_INTERVAL_MS, SparkplugState, ncmdTopic, parseSparkplugTopic, rebirthPayload, sparkplugAddress } from '../../../ingest/mqtt/sparkplug.ts';
import { payloadDecoder } from '../../../ingest/pipeline/decode.ts';
import { TagSet } from '../../../ingest/pipeline/tag-set.ts';
import type { TagConfig } from '../../../ingest/pipeline/types.ts';
import { QUALITY_FLAG, QUALITY_GRADE } from '../../../shared/contracts/sample-quality.ts';
import { mqttSourceOptions, mqttOptionsInput } from '../../../shared/contracts/wiring.ts';
import { TestEdgeNode, decodeCommand } from '../../helpers/sparkplug-edge-node.ts';

// Expectations follow the Eclipse Sparkplug 3.0.0 specification (section and tck-id named per check).

const T0 = Date.UTC(2026, 11, 2, 1, 0, 0);
const BAD_FROM_SOURCE = QUALITY_GRADE.bad | QUALITY_FLAG.sourceStatus;

/** An edge node KB1 in group kestrel with its own metric and a device RAS1 with two. */
function births(e: TestEdgeNode) {
  const nb = e.nbirth(T0, [{ name: 'Basin 1/MLSS', alias: 10, type: 'Double', value: 3.1, timestamp: T0, properties: { engUnit: { type: 'String', value: 'g/L' } } }]);
  const db = e.dbirth('RAS1', T0 + 1, [
    { name: 'Flow', alias: 20, type: 'Float', value: 410, timestamp: T0 + 1, properties: { engUnit: { type: 'String', value: 'm3/h' } } },
    { name: 'Running', alias: 21, type: 'Boolean', value: true, timestamp: T0 + 1 },
    { name: 'Mode', alias: 22, type: 'String', value: 'AUTO', timestamp: T0 + 1 },
  ]);
  return { nb, db };
}

describe('Sparkplug topics (Sparkplug 3.0 §4.1)', () => {
  it('parses namespace/group_id/message_type/edge_node_id/[device_id]', () => {
    expect(parseSparkplugTopic('spBv1.0/kestrel/NDATA/KB1')).toEqual({ group: 'kestrel', type: 'NDATA', node: 'KB1', device: null });
    expect(parseSparkplugTopic('spBv1.0/kestrel/DDATA/KB1/RAS1')).toEqual({ group: 'kestrel', type: 'DDATA', node: 'KB1', device: 'RAS1' });
    // §4.1.5: device_id only on D* types and never on N* types.
    expect(parseSparkplugTopic('spBv1.0/kestrel/DDATA/KB1')).toHaveProperty('error');
    expect(parseSparkplugTopic('spBv1.0/kestrel/NDATA/KB1/RAS1')).toHaveProperty('error');
    expect(parseSparkplugTopic('spBv1.0/kestrel/XDATA/KB1')).toHaveProperty('error');
    expect(ncmdTopic('kestrel', 'KB1')).toBe('spBv1.0/kestrel/NCMD/KB1');
    expect(sparkplugAddress('kestrel', 'KB1', null, 'Basin 1/MLSS')).toBe('kestrel/KB1//Basin 1/MLSS');
  });

  it('detects Sparkplug B by its namespace, whatever the payload option', () => {
    expect(payloadDecoder('spBv1.0/g/NDATA/n', 'json')).toBe('sparkplugB');
    expect(payloadDecoder('spBv1.0x/g', 'json')).toBe('json');
    expect(payloadDecoder('kb/t1/AIT-111', 'json')).toBe('json');
    expect(payloadDecoder('kb/t1/AIT-111', 'sparkplugB')).toBe('other');
  });

  it('source options: payload json and requestRebirth false by default; unknown values refused', () => {
    expect(mqttSourceOptions.parse({})).toMatchObject({ payload: 'json', requestRebirth: false });
    expect(mqttOptionsInput.safeParse({ payload: 'sparkplugB', requestRebirth: true }).success).toBe(true);
    expect(mqttOptionsInput.safeParse({ payload: 'sparkplugA' }).success).toBe(false);
  });
});

describe('SparkplugState', () => {
  it('births define names, aliases, datatypes and units; DATA resolves aliases; values by datatype', () => {
    const s = new SparkplugState();
    const e = new TestEdgeNode('kestrel', 'KB1', 3);
    const { nb, db } = births(e);
    const r1 = s.handle(nb.topic, nb.payload, T0 + 50);
    expect(r1.readings.find((x) => x.address === 'kestrel/KB1//Basin 1/MLSS')).toEqual({ address: 'kestrel/KB1//Basin 1/MLSS', v: 3.1, ts: T0, q: 'good', meta: { type: 'Double', unit: 'g/L', alias: 10 } });
    // bdSeq (Int64, a protobuf uint64 → Long) and Node Control/Rebirth (Boolean false → 0) are metrics too.
    expect(r1.readings.find((x) => x.address === 'kestrel/KB1//bdSeq')?.v).toBe(3);
    expect(r1.readings.find((x) => x.address === 'kestrel/KB1//Node Control/Rebirth')?.v).toBe(0);
    const r2 = s.handle(db.topic, db.payload, T0 + 50);
    expect(r2.readings.map((x) => [x.address, x.v, x.meta.unit])).toEqual([
      ['kestrel/KB1/RAS1/Flow', 410, 'm3/h'],
      ['kestrel/KB1/RAS1/Running', 1, null],
    ]);
    // A String metric is not a process value.
    expect(r2.unreadable).toEqual([{ address: 'kestrel/KB1/RAS1/Mode', reason: expect.stringContaining('String is not numeric'), meta: { type: 'String', unit: null, alias: 22 } }]);

    // DDATA by alias only; the metric timestamp wins over the payload's, the payload's over receipt.
    const d1 = e.ddata('RAS1', T0 + 10_000, [
      { alias: 20, type: 'Float', value: 395.5, timestamp: T0 + 9_000 },
      { alias: 21, type: 'Boolean', value: false },
    ]);
    const r3 = s.handle(d1.topic, d1.payload, T0 + 11_000);
    expect(r3.readings.map((x) => [x.address, x.v, x.ts])).toEqual([
      ['kestrel/KB1/RAS1/Flow', 395.5, T0 + 9_000],
      ['kestrel/KB1/RAS1/Running', 0, T0 + 10_000],
    ]);
    expect(r3.deadLetter).toBeNull();
    expect(r3.unknownAliases).toBeNull();
    // An alias of the node is not the device's (aliases belong to where the birth put them).
    const d2 = e.ddata('RAS1', T0 + 12_000, [{ alias: 10, type: 'Double', value: 2 }]);
    expect(s.handle(d2.topic, d2.payload, T0 + 12_000).unknownAliases).toContain('alias 10 not defined');
  });

  it('dead-letters DATA before any birth with the reason, and asks for a rebirth only when allowed, once per node per minute', () => {
    const e = new TestEdgeNode('kestrel', 'KB2');
    e.skipSeq(7);
    const data = e.ndata(T0, [{ alias: 10, type: 'Double', value: 1 }]);

    const quiet = new SparkplugState();
    const q = quiet.handle(data.topic, data.payload, T0);
    expect(q.deadLetter).toMatch(/NDATA from edge node kestrel\/KB2 before any NBIRTH .* a rebirth is needed/);
    expect(q.readings).toEqual([]);
    expect(q.rebirth).toBeNull();
    expect(quiet.status().needRebirth).toEqual([{ edgeNode: 'kestrel/KB2', reason: q.deadLetter }]);
    expect(quiet.status().rebirthRequests).toBe(0);

    const asking = new SparkplugState({ requestRebirth: true });
    expect(asking.handle(data.topic, data.payload, T0).rebirth).toEqual({ group: 'kestrel', node: 'KB2' });
    expect(asking.handle(data.topic, data.payload, T0 + REBIRTH_INTERVAL_MS - 1).rebirth).toBeNull();
    expect(asking.handle(data.topic, data.payload, T0 + REBIRTH_INTERVAL_MS).rebirth).toEqual({ group: 'kestrel', node: 'KB2' });
    // The birth that answers clears the node from the list.
    const { nb } = births(e);
    asking.handle(nb.topic, nb.payload, T0 + REBIRTH_INTERVAL_MS + 1);
    expect(asking.status().needRebirth).toEqual([]);
  });

  it('the rebirth command is NCMD Node Control/Rebirth = true with a timestamp (§4.2.1 NCMD)', () => {
    expect(decodeCommand(rebirthPayload(T0))).toEqual([{ name: 'Node Control/Rebirth', value: true }]);
  });

  it('counts each missing seq number, 255 wrapping to 0 (tck-id-payloads-sequence-num-incrementing)', () => {
    const s = new SparkplugState();
    const e = new TestEdgeNode('g', 'n');
    const birth = () => e.nbirth(T0, [{ name: 'm', alias: 10, type: 'Double', value: 0, timestamp: T0 }]);
    const nb = birth();
    s.handle(nb.topic, nb.payload, T0); // seq 0
    const send = () => {
      const m = e.ndata(T0, [{ alias: 10, type: 'Double', value: 1 }]);
      s.handle(m.topic, m.payload, T0);
    };
    send(); // 1
    e.skipSeq(2); // 2 and 3 lost
    send(); // 4
    expect(s.status().seqGaps).toBe(2);
    e.skipSeq(249); // 5 … 253 lost: 249 numbers
    send(); // 254
    send(); // 255
    send(); // 0 (wrap, no gap)
    expect(s.status().seqGaps).toBe(2 + 249);
    e.skipSeq(3); // 1, 2, 3 lost across nothing
    send(); // 4
    expect(s.status().seqGaps).toBe(2 + 249 + 3);
    // A new NBIRTH restarts at 0 without counting a gap.
    const again = birth();
    s.handle(again.topic, again.payload, T0);
    expect(s.status().seqGaps).toBe(254);
    expect(s.status().edgeNodes[0]).toMatchObject({ edgeNode: 'g/n', online: true, seq: 0, seqGaps: 254 });
  });

  it('NDEATH of the current bdSeq ends the session at its receive time; a late Will of an earlier session is ignored', () => {
    const s = new SparkplugState();
    const e = new TestEdgeNode('g', 'n', 5);
    const { nb, db } = births(e);
    s.handle(nb.topic, nb.payload, T0);
    s.handle(db.topic, db.payload, T0);
    const stale = new TestEdgeNode('g', 'n', 4).ndeath(T0 - 86_400_000);
    const r0 = s.handle(stale.topic, stale.payload, T0 + 500);
    expect(r0.death).toBeNull();
    expect(r0.ignored).toMatch(/earlier session/);
    const death = e.ndeath(T0 - 60_000); // the Will's timestamp is from CONNECT time
    const r = s.handle(death.topic, death.payload, T0 + 1_000);
    expect(r.death).toEqual({ prefix: 'g/n/', ts: T0 + 1_000 });
    expect(s.status().edgeNodes[0]).toMatchObject({ online: false, devicesOnline: [] });
    // After the death the aliases are gone: DATA is dead-lettered, never guessed.
    const late = e.ddata('RAS1', T0 + 2_000, [{ alias: 20, type: 'Float', value: 1 }]);
    expect(s.handle(late.topic, late.payload, T0 + 2_000).deadLetter).toMatch(/before any DBIRTH/);
  });

  it('DDEATH marks the device at its payload timestamp; null and Quality-property values are bad (§6.4.6 is_null, §6.4.9 Quality Codes)', () => {
    const s = new SparkplugState();
    const e = new TestEdgeNode('g', 'n');
    const { nb, db } = births(e);
    s.handle(nb.topic, nb.payload, T0);
    s.handle(db.topic, db.payload, T0);
    const d = e.ddata('RAS1', T0 + 5, [
      { alias: 20, type: 'Float', value: null },
      { alias: 20, type: 'Float', value: 12, timestamp: T0 + 6, properties: { Quality: { type: 'Int32', value: 500 } } },
      { alias: 20, type: 'Float', value: 13, timestamp: T0 + 7, properties: { Quality: { type: 'Int32', value: 192 } } },
    ]);
    expect(s.handle(d.topic, d.payload, T0 + 9).readings.map((x) => [x.v, x.q])).toEqual([
      [null, 'bad'],
      [12, 'bad'],
      [13, 'good'],
    ]);
    const dd = e.ddeath('RAS1', T0 + 20);
    expect(s.handle(dd.topic, dd.payload, T0 + 25).death).toEqual({ prefix: 'g/n/RAS1/', ts: T0 + 20 });
    expect(s.status().deaths).toBe(1);
  });

  it('a DATA metric without a datatype is unreadable, not a null reading', () => {
    const s = new SparkplugState();
    const e = new TestEdgeNode('g', 'n');
    const { nb, db } = births(e);
    s.handle(nb.topic, nb.payload, T0);
    s.handle(db.topic, db.payload, T0);
    // The package encodes an unknown type name as DataType 0 (Unknown) and then sets no value.
    const d = e.ddata('RAS1', T0 + 5, [{ alias: 20, type: 'Unknown' as never, value: 5 }]);
    const r = s.handle(d.topic, d.payload, T0 + 9);
    expect(r.readings).toEqual([]);
    expect(r.unreadable).toEqual([{ address: 'g/n/RAS1/Flow', reason: 'Flow: metric without a datatype in this DDATA; its value cannot be read', meta: { type: 'Float', unit: 'm3/h', alias: 20 } }]);
  });

  it('dead-letters a payload that is not Sparkplug B protobuf', () => {
    const r = new SparkplugState().handle('spBv1.0/g/NDATA/n', Buffer.from([0xff, 0xff, 0xff, 0xff, 0xff]), T0);
    expect(r.deadLetter).toMatch(/not a Sparkplug B payload/);
  });
});

describe('MqttMessageHandler with Sparkplug B', () => {
  const tag = (id: number, address: string): TagConfig => ({ id, sourceId: 1, address, scaleGain: 1, scaleOffset: 0, deadband: 0, expectedPeriod_s: 10, rangeLow: null, rangeHigh: null, samplingInterval_ms: null, kind: 'analog' });

  it('maps metrics by address, writes bad samples at a death, dead-letters mapped unreadable metrics, lists metrics in discovery', () => {
    const tags = new TagSet();
    tags.update([tag(1, 'kestrel/KB1//Basin 1/MLSS'), tag(2, 'kestrel/KB1/RAS1/Flow'), tag(3, 'kestrel/KB1/RAS1/Mode'), tag(4, 'other/X/Y/Z')]);
    const discovery = new Discovery();
    const h = new MqttMessageHandler(1, tags, discovery);
    const e = new TestEdgeNode('kestrel', 'KB1');
    const { nb, db } = births(e);
    const a = h.handle(nb.topic, nb.payload, T0 + 1);
    expect(a.samples).toEqual([{ tagId: 1, ts: T0, value: 3.1, quality: 0 }]);
    expect(a.unmapped).toBe(2); // bdSeq, Node Control/Rebirth
    const b = h.handle(db.topic, db.payload, T0 + 2);
    expect(b.samples).toEqual([{ tagId: 2, ts: T0 + 1, value: 410, quality: 0 }]);
    expect(b.deadLetters.map((d) => [d.address, d.reason])).toEqual([['kestrel/KB1/RAS1/Mode', 'Mode: datatype String is not numeric; only numeric and Boolean metrics can be stored']]);
    const dd = e.ddeath('RAS1', T0 + 30);
    const c = h.handle(dd.topic, dd.payload, T0 + 31);
    // tags 2 and 3 sit under the device; tag 1 is the node's and stays.
    expect(c.samples).toEqual([
      { tagId: 2, ts: T0 + 30, value: null, quality: BAD_FROM_SOURCE },
      { tagId: 3, ts: T0 + 30, value: null, quality: BAD_FROM_SOURCE },
    ]);
    const seen = new Map(discovery.drain().map((d) => [d.topic, d]));
    expect(seen.get('kestrel/KB1/RAS1/Flow')?.tagId).toBe(2);
    expect(JSON.parse(seen.get('kestrel/KB1/RAS1/Flow')!.lastPayload)).toMatchObject({ v: 410, type: 'Float', unit: 'm3/h', alias: 20 });
    expect(seen.get('kestrel/KB1//bdSeq')?.tagId).toBeNull();
    // Dead letters carry a readable rendering, not protobuf bytes.
    expect(JSON.parse(b.deadLetters[0]!.payload)).toMatchObject({ topic: db.topic, seq: 1 });
  });

  it('a sparkplugB source ignores other topics; a json source still reads JSON beside Sparkplug', () => {
    const tags = new TagSet();
    tags.update([tag(1, 'kb/t1')]);
    const sp = new MqttMessageHandler(1, tags, new Discovery(), { payload: 'sparkplugB', requestRebirth: false });
    expect(sp.handle('kb/t1', Buffer.from('{"v": 1}'), T0)).toMatchObject({ samples: [], unmapped: 1 });
    const js = new MqttMessageHandler(1, tags, new Discovery());
    expect(js.handle('kb/t1', Buffer.from('{"v": 1}'), T0).samples).toHaveLength(1);
  });
});
