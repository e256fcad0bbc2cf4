import { createRequire } from 'node:module';
import { describe, expect, it, vi } from 'vitest';
import { FastPathParser, type PacketParser } from '../../../server/broker/publish-fast-path.ts';
import { mulberry32 } from '../domain/prng.ts';

const require = createRequire(import.meta.url);
const mqttPacket = require('mqtt-packet') as { parser(o?: object): PacketParser; generate(p: object, o?: object): Buffer };

/**
 * Differential check: the same bytes, cut into the same chunks, through mqtt-packet's parser
 * alone and through the fast path in front of it. Packets must agree field for field (with the
 * same property order) and the first error must be the same error; what follows an error is not
 * compared, since both then start afresh on the next chunk and a connection is closed at its
 * first error (aedes lib/client.js, mqtt.js client).
 */
type Event = { packet: Record<string, unknown> } | { error: string };

function run(make: () => PacketParser, chunks: Buffer[]): Event[] {
  const p = make();
  const out: Event[] = [];
  p.on('packet', (packet: Record<string, unknown>) => out.push({ packet }));
  p.on('error', (err: Error) => out.push({ error: err.message }));
  for (const c of chunks) p.parse(c);
  return out;
}

function untilFirstError(events: Event[]): unknown[] {
  const cut = events.findIndex((e) => 'error' in e);
  return (cut < 0 ? events : events.slice(0, cut + 1)).map((e) =>
    'error' in e ? e : Object.entries(e.packet).map(([k, v]) => [k, Buffer.isBuffer(v) ? `buf:${v.toString('hex')}` : v]),
  );
}

function compare(chunks: Buffer[], opts?: object): Event[] {
  const plain = run(() => mqttPacket.parser(opts), chunks);
  const fast = run(() => new FastPathParser(mqttPacket.parser(opts)) as unknown as PacketParser, chunks);
  expect(untilFirstError(fast)).toEqual(untilFirstError(plain));
  return fast;
}

/** Cuts `bytes` at random places: single bytes, small pieces and large runs. */
function cut(bytes: Buffer, rnd: () => number): Buffer[] {
  const out: Buffer[] = [];
  for (let i = 0; i < bytes.length; ) {
    const r = rnd();
    const n = r < 0.2 ? 1 : r < 0.5 ? 1 + Math.floor(rnd() * 8) : 1 + Math.floor(rnd() * 4096);
    out.push(Buffer.from(bytes.subarray(i, i + n)));
    i += n;
  }
  return out;
}

const TOPICS = ['b/tag1', 'kb/ab1/MLSS', 'plant/clarifier-2/blanket_m', 'grüße/Ω', 'x', ''.padEnd(300, 'long/')];

function randomPacket(rnd: () => number, id: () => number): object {
  const r = rnd();
  const topic = TOPICS[Math.floor(rnd() * TOPICS.length)]!;
  const size = rnd() < 0.05 ? 20_000 + Math.floor(rnd() * 60_000) : Math.floor(rnd() * 200);
  const payload = Buffer.allocUnsafe(size);
  for (let i = 0; i < size; i++) payload[i] = (rnd() * 256) | 0;
  if (r < 0.55) {
    const qos = Math.floor(rnd() * 3);
    return { cmd: 'publish', topic, payload, qos, retain: rnd() < 0.2, dup: rnd() < 0.2, ...(qos ? { messageId: id() } : {}) };
  }
  if (r < 0.8) return { cmd: 'puback', messageId: id() };
  if (r < 0.84) return { cmd: 'pubrec', messageId: id() };
  if (r < 0.87) return { cmd: 'pubrel', messageId: id() };
  if (r < 0.9) return { cmd: 'pubcomp', messageId: id() };
  if (r < 0.93) return { cmd: 'subscribe', messageId: id(), subscriptions: [{ topic: 'b/#', qos: 1 }] };
  if (r < 0.96) return { cmd: 'pingreq' };
  if (r < 0.98) return { cmd: 'suback', messageId: id(), granted: [1] };
  return { cmd: 'unsubscribe', messageId: id(), unsubscriptions: ['b/#'] };
}

describe('FastPathParser against mqtt-packet alone (MQTT 3.1.1 §2–§3)', () => {
  it('agrees on 200 seeded streams of well-formed packets cut at random places', () => {
    const rnd = mulberry32(20261202);
    let seen = 0;
    for (let s = 0; s < 200; s++) {
      let n = 0;
      const id = () => (n = (n % 65_535) + 1);
      const connect = mqttPacket.generate({ cmd: 'connect', protocolId: 'MQTT', protocolVersion: 4, clientId: `c${s}`, clean: true, keepalive: 60 });
      const packets = Array.from({ length: 20 + Math.floor(rnd() * 80) }, () => mqttPacket.generate(randomPacket(rnd, id)));
      const events = compare(cut(Buffer.concat([connect, ...packets]), rnd));
      expect(events.length).toBe(packets.length + 1);
      seen += events.length;
    }
    expect(seen).toBeGreaterThan(10_000);
  }, 60_000);

  it('gives the fast-path packets mqtt-packet shape: same class, same keys in the same order', () => {
    const bytes = Buffer.concat([
      mqttPacket.generate({ cmd: 'publish', topic: 'b/tag7', payload: '{"v":1}', qos: 1, messageId: 9, retain: true, dup: false }),
      mqttPacket.generate({ cmd: 'publish', topic: 'b/tag8', payload: '2', qos: 0 }),
      mqttPacket.generate({ cmd: 'puback', messageId: 65_535 }),
    ]);
    const [a, b, c] = compare([bytes]).map((e) => (e as { packet: Record<string, unknown> }).packet);
    expect(Object.keys(a!)).toEqual(['cmd', 'retain', 'qos', 'dup', 'length', 'topic', 'payload', 'messageId']);
    expect(a).toMatchObject({ cmd: 'publish', topic: 'b/tag7', qos: 1, messageId: 9, retain: true });
    expect(String(a!.payload)).toBe('{"v":1}');
    expect(Object.keys(b!)).toEqual(['cmd', 'retain', 'qos', 'dup', 'length', 'topic', 'payload']);
    expect(c).toMatchObject({ cmd: 'puback', messageId: 65_535, length: 2, topic: null, payload: null });
  });

  const good = mqttPacket.generate({ cmd: 'publish', topic: 'b/tag1', payload: '1', qos: 1, messageId: 1 });
  const malformed: [string, Buffer][] = [
    ['PUBLISH with both QoS bits set', Buffer.from([0x36, 0x05, 0x00, 0x01, 0x61, 0x00, 0x01])],
    ['PUBACK with reserved flags set', Buffer.from([0x42, 0x02, 0x00, 0x01])],
    ['PUBACK with remaining length 3', Buffer.from([0x40, 0x03, 0x00, 0x01, 0x00])],
    ['PUBLISH whose topic is longer than the packet', Buffer.from([0x30, 0x04, 0x00, 0x09, 0x61, 0x62])],
    ['PUBLISH with a one-byte remaining length', Buffer.from([0x30, 0x01, 0x00])],
    ['remaining length of five bytes', Buffer.from([0x30, 0xff, 0xff, 0xff, 0xff, 0x01, 0x00])],
    ['SUBSCRIBE with wrong flags', Buffer.from([0x80, 0x02, 0x00, 0x01])],
    ['reserved packet type 0', Buffer.from([0x00, 0x00])],
  ];
  for (const [what, bad] of malformed) {
    it(`reports the same first error as mqtt-packet for ${what}, whole or byte by byte`, () => {
      const stream = Buffer.concat([good, bad, good]);
      const whole = compare([stream]);
      compare([...stream].map((b) => Buffer.from([b])));
      // each case is one mqtt-packet reports as an error, except the ones it accepts quietly
      expect(whole.length).toBeGreaterThanOrEqual(2);
    });
  }

  it('reports a QoS 1 PUBLISH with no room for its packet identifier as an error (MQTT 3.1.1 §3.3.2.2), which mqtt-packet lets through', () => {
    const bad = Buffer.from([0x32, 0x04, 0x00, 0x02, 0x61, 0x62]);
    for (const chunks of [[Buffer.concat([good, bad, good])], [...Buffer.concat([good, bad, good])].map((b) => Buffer.from([b]))]) {
      const fast = run(() => new FastPathParser(mqttPacket.parser()) as unknown as PacketParser, chunks);
      expect(untilFirstError(fast)).toEqual([untilFirstError(run(() => mqttPacket.parser(), [good]))[0], { error: 'Cannot parse messageId' }]);
      // mqtt-packet alone: a packet with an identifier taken from whatever followed (or -1)
      const plain = run(() => mqttPacket.parser(), chunks);
      expect(plain.slice(0, 2).every((e) => 'packet' in e)).toBe(true);
    }
  });

  it('joins the chunks of a large PUBLISH once, when it is complete', () => {
    const payload = Buffer.alloc(4 * 1024 * 1024, 7);
    const bytes = mqttPacket.generate({ cmd: 'publish', topic: 'b/batch', payload, qos: 1, messageId: 2 });
    const chunks: Buffer[] = [];
    for (let i = 0; i < bytes.length; i += 65_536) chunks.push(bytes.subarray(i, i + 65_536));
    const concat = vi.spyOn(Buffer, 'concat');
    try {
      const events = run(() => new FastPathParser(mqttPacket.parser()) as unknown as PacketParser, chunks);
      expect(events).toHaveLength(1);
      expect(((events[0] as { packet: Record<string, unknown> }).packet.payload as Buffer).equals(payload)).toBe(true);
      // one join of all 65 chunks, not one per chunk (which would copy about 130 MB)
      const copied = concat.mock.calls.reduce((n, [list]) => n + (list as Buffer[]).reduce((m, b) => m + b.length, 0), 0);
      expect(copied).toBe(bytes.length);
    } finally {
      concat.mockRestore();
    }
  });

  it('leaves MQTT 5 connections to mqtt-packet (properties, reason codes)', () => {
    const opts = { protocolVersion: 5 };
    const bytes = Buffer.concat([
      mqttPacket.generate({ cmd: 'publish', topic: 't', payload: 'p', qos: 1, messageId: 3, properties: { payloadFormatIndicator: true } }, opts),
      mqttPacket.generate({ cmd: 'puback', messageId: 3, reasonCode: 0 }, opts),
    ]);
    const events = compare(cut(bytes, mulberry32(5)), opts);
    expect(events).toHaveLength(2);
    expect((events[0] as { packet: Record<string, unknown> }).packet.properties).toEqual({ payloadFormatIndicator: true });
  });
});
