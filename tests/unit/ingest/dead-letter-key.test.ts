import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { MqttMessageHandler } from '../../../ingest/mqtt/message-handler.ts';
import { TagSet } from '../../../ingest/pipeline/tag-set.ts';
import { deadLetter, deliveryKey, opcuaDelivery, receiptKey, type TagConfig } from '../../../ingest/pipeline/types.ts';
import { Spool } from '../../../ingest/sink/spool.ts';

const tag = (id: number, address: string): TagConfig => ({ id, sourceId: 1, address, scaleGain: 1, scaleOffset: 0, deadband: 0, expectedPeriod_s: 10, rangeLow: null, rangeHigh: null, samplingInterval_ms: null, kind: 'analog' });

function handler(): MqttMessageHandler {
  const tags = new TagSet();
  tags.update([tag(1, 'p/a'), tag(2, 'p/b')]);
  return new MqttMessageHandler(1, tags);
}

describe('dead-letter delivery identity', () => {
  it('deliveryKey: SHA-256 (FIPS 180-4) over length-prefixed parts, so moving a boundary or a null changes it', () => {
    // The empty list: the SHA-256 of the empty message (a well-known value, from memory; sha256sum </dev/null gives it).
    expect(deliveryKey()).toBe('e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855');
    expect(deliveryKey('ab', 'c')).not.toBe(deliveryKey('a', 'bc'));
    expect(deliveryKey(null, 'x')).not.toBe(deliveryKey('', 'x'));
    expect(deliveryKey(1)).not.toBe(deliveryKey('1'));
    expect(deliveryKey('a', 'b')).toMatch(/^[0-9a-f]{64}$/);
  });

  it('the same MQTT message handled twice (a redelivery, a fresh process) gives the same keys; another payload, topic or source does not', () => {
    const poison = Buffer.from('{"v": 1, "poison": 7, \u0000}');
    const first = handler().handle('p/a', poison, 1_000).deadLetters;
    const again = handler().handle('p/a', poison, 9_000).deadLetters;
    expect(first).toHaveLength(1);
    expect(again[0]!.key).toBe(first[0]!.key);
    expect(again[0]!.ts).not.toBe(first[0]!.ts);
    expect(handler().handle('p/a', Buffer.from('{"v": 1, "poison": 8, \u0000}'), 1_000).deadLetters[0]!.key).not.toBe(first[0]!.key);
    expect(handler().handle('p/b', poison, 1_000).deadLetters[0]!.key).not.toBe(first[0]!.key);
    const tags = new TagSet();
    tags.update([{ ...tag(1, 'p/a'), sourceId: 2 }]);
    expect(new MqttMessageHandler(2, tags).handle('p/a', poison, 1_000).deadLetters[0]!.key).not.toBe(first[0]!.key);
  });

  it('equal bad items of one batch message stay separate findings, each with the same key on a redelivery', () => {
    // A gain of 1e308 makes 10 × 1e308 overflow to Infinity (IEEE 754 double maximum ≈ 1.8e308):
    // two items on p/c fail with the same reason, one on p/d.
    const tags = new TagSet();
    tags.update([{ ...tag(3, 'p/c'), scaleGain: 1e308 }, { ...tag(4, 'p/d'), scaleGain: 1e308 }]);
    const h = () => new MqttMessageHandler(1, tags);
    const item = (topic: string, s: number) => ({ topic, v: 10, ts: new Date(Date.UTC(2026, 11, 2, 0, 0, s)).toISOString() });
    const msg = Buffer.from(JSON.stringify({ samples: [item('p/c', 1), item('p/c', 2), item('p/d', 3)] }));
    const first = h().handle('p/batch', msg, 1_000).deadLetters;
    expect(first.map((d) => [d.address, d.reason])).toEqual([
      ['p/c', 'scaled value is not finite (raw 10 × 1e+308 + 0)'],
      ['p/c', 'scaled value is not finite (raw 10 × 1e+308 + 0)'],
      ['p/d', 'scaled value is not finite (raw 10 × 1e+308 + 0)'],
    ]);
    expect(new Set(first.map((d) => d.key)).size).toBe(3);
    expect(h().handle('p/batch', msg, 2_000).deadLetters.map((d) => d.key)).toEqual(first.map((d) => d.key));
  });

  it('OPC UA: node, source timestamp and status identify the value, not the text of the DataValue (it carries the server timestamp)', () => {
    const at = Date.UTC(2026, 11, 2, 3, 0, 0);
    const a = deadLetter(4, 'ns=2;s=AIT-111', 'value: NaN serverTimestamp: 03:00:00.100', 'scaled value is not finite', at + 100, opcuaDelivery('ns=2;s=AIT-111', at, 0));
    const b = deadLetter(4, 'ns=2;s=AIT-111', 'value: NaN serverTimestamp: 03:00:05.900', 'scaled value is not finite', at + 5_900, opcuaDelivery('ns=2;s=AIT-111', at, 0));
    expect(b.key).toBe(a.key);
    expect(deadLetter(4, 'ns=2;s=AIT-111', 'x', 'scaled value is not finite', at, opcuaDelivery('ns=2;s=AIT-111', at + 1_000, 0)).key).not.toBe(a.key);
    // 0x80000000 = Bad (OPC 10000-4 StatusCode severity bits).
    expect(deadLetter(4, 'ns=2;s=AIT-111', 'x', 'scaled value is not finite', at, opcuaDelivery('ns=2;s=AIT-111', at, 0x80000000)).key).not.toBe(a.key);
  });

  it('without a delivery a letter is its receipt: another receive time is another letter', () => {
    expect(deadLetter(1, 'x', 'p', 'r', 1).key).not.toBe(deadLetter(1, 'x', 'p', 'r', 2).key);
    expect(deadLetter(1, 'x', 'p', 'r', 1).key).toBe(deadLetter(1, 'x', 'p', 'r', 1).key);
  });

  it('a spool record written before keys existed is keyed by its receipt on replay', async () => {
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'spool-key-'));
    const s = await Spool.open(dir);
    const old = { ts: 3, sourceId: 1, address: 'a', payload: 'x', payloadBytes: 1, reason: 'r' };
    // As an older version wrote it: the record's JSON has no `key`.
    await s.append({ samples: [], deadLetters: [old as Parameters<typeof receiptKey>[0] & { key: string }] });
    const got: string[] = [];
    await s.replay(async (recs) => {
      for (const r of recs) for (const d of r.deadLetters) got.push(d.key);
    });
    await s.close();
    expect(got).toEqual([receiptKey(old)]);
    fs.rmSync(dir, { recursive: true, force: true });
  });
});
