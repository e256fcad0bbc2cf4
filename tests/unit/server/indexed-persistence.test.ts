import { createRequire } from 'node:module';
import mqtt from 'mqtt';
import { afterEach, describe, expect, it } from 'vitest';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../../server/broker/embedded-broker.ts';
import { IndexedMemoryPersistence } from '../../../server/broker/indexed-persistence.ts';
import { mulberry32 } from '../domain/prng.js';

const require = createRequire(import.meta.url);
// the stock store the indexed one must behave like
const StockPersistence = require('aedes-persistence/asyncPersistence.js');

interface Pkt {
  cmd: string;
  topic: string;
  payload: Buffer;
  qos: number;
  brokerId: string;
  brokerCounter: number;
  messageId?: number;
  retain: boolean;
  dup: boolean;
}

async function drain(r: NodeJS.ReadableStream): Promise<Pkt[]> {
  const out: Pkt[] = [];
  for await (const p of r as AsyncIterable<Pkt>) out.push(p);
  return out;
}

const view = (p: Pkt | undefined) => (p ? { topic: p.topic, counter: p.brokerCounter, id: p.messageId, cmd: p.cmd } : undefined);

describe('indexed outgoing queue of the embedded broker', () => {
  it('gives the same results as the stock aedes-persistence memory store over 3 000 seeded operations', async () => {
    const stock = new StockPersistence();
    const ours = new IndexedMemoryPersistence();
    const rnd = mulberry32(11);
    const clients = [{ id: 'a' }, { id: 'b' }];
    let counter = 0;
    let nextId = 1;
    const sent: Pkt[] = [];
    for (let i = 0; i < 3_000; i++) {
      const client = clients[Math.floor(rnd() * clients.length)]!;
      const op = rnd();
      if (op < 0.4) {
        const p: Pkt = { cmd: 'publish', topic: `t/${i}`, payload: Buffer.from(String(i)), qos: 1, brokerId: 'B1', brokerCounter: ++counter, retain: false, dup: false };
        await stock.outgoingEnqueueCombi([{ clientId: client.id }], p);
        await ours.outgoingEnqueueCombi([{ clientId: client.id }], p as never);
        sent.push({ ...p, topic: `${client.id}|${p.topic}` });
      } else if (op < 0.7) {
        // the broker gives a queued packet its identifier (ids wrap at 50 here to exercise reuse)
        const mine = sent.filter((p) => p.topic.startsWith(`${client.id}|`) && p.messageId === undefined);
        const p = mine[Math.floor(rnd() * mine.length)];
        if (!p) continue;
        p.messageId = nextId;
        nextId = (nextId % 50) + 1;
        const upd = { ...p, topic: p.topic.slice(2) };
        const a = await stock.outgoingUpdate(client, upd).then(() => 'ok', (e: Error) => e.message);
        const b = await ours.outgoingUpdate(client, upd as never).then(() => 'ok', (e: Error) => e.message);
        expect(b).toBe(a);
      } else if (op < 0.95) {
        const id = 1 + Math.floor(rnd() * 50);
        const a = await stock.outgoingClearMessageId(client, { messageId: id });
        const b = await ours.outgoingClearMessageId(client, { messageId: id } as never);
        expect(view(b as unknown as Pkt)).toEqual(view(a));
        if (a) {
          const k = sent.findIndex((p) => p.topic === `${client.id}|${a.topic}`);
          sent.splice(k, 1);
        }
      } else {
        expect((await drain(ours.outgoingStream(client))).map(view)).toEqual((await drain(stock.outgoingStream(client))).map(view));
      }
    }
    // an update for a packet that is not queued fails in both
    const ghost = { cmd: 'publish', topic: 'x', payload: Buffer.alloc(0), qos: 1, brokerId: 'B1', brokerCounter: 999_999, messageId: 77, retain: false, dup: false };
    await expect(ours.outgoingUpdate({ id: 'a' }, ghost as never)).rejects.toThrow('no such packet');
    await expect(stock.outgoingUpdate({ id: 'a' }, ghost)).rejects.toThrow('no such packet');
    for (const c of clients) expect((await drain(ours.outgoingStream(c))).map(view)).toEqual((await drain(stock.outgoingStream(c))).map(view));
  });

  it('answers subscriptionsByTopic like the stock store over 2 000 seeded subscription changes and lookups', async () => {
    // The matches are remembered per topic (aedes asks for every QoS 1 PUBLISH); any change of
    // subscriptions must forget them, also when the change comes between a lookup and its answer.
    const stock = new StockPersistence();
    const ours = new IndexedMemoryPersistence();
    const rnd = mulberry32(23);
    const filters = ['a/#', 'a/+/c', 'a/b/c', '+/b/#', 'z/y', '#'];
    const topics = ['a/b/c', 'a/x/c', 'a/b', 'q/b/c', 'z/y', 'z/z'];
    const clients = ['c1', 'c2', 'c3'];
    const norm = (subs: { clientId: string; topic: string; qos: number }[]) => subs.map((x) => `${x.clientId} ${x.topic} ${x.qos}`).sort();
    for (let i = 0; i < 2_000; i++) {
      const client = { id: clients[Math.floor(rnd() * clients.length)]! };
      const op = rnd();
      if (op < 0.25) {
        const subs = [{ topic: filters[Math.floor(rnd() * filters.length)]!, qos: Math.floor(rnd() * 3) }];
        await stock.addSubscriptions(client, subs);
        await ours.addSubscriptions(client as never, subs as never);
      } else if (op < 0.4) {
        const f = [filters[Math.floor(rnd() * filters.length)]!];
        await stock.removeSubscriptions(client, f);
        await ours.removeSubscriptions(client as never, f as never);
      } else if (op < 0.45) {
        await stock.cleanSubscriptions(client);
        await ours.cleanSubscriptions(client as never);
      } else if (op < 0.55) {
        // a lookup whose answer is still pending when a subscription changes
        const t = topics[Math.floor(rnd() * topics.length)]!;
        const pending = ours.subscriptionsByTopic(t);
        const subs = [{ topic: filters[Math.floor(rnd() * filters.length)]!, qos: 1 }];
        void ours.addSubscriptions(client as never, subs as never);
        await stock.addSubscriptions(client, subs);
        await pending;
      } else {
        const t = topics[Math.floor(rnd() * topics.length)]!;
        expect(norm(await ours.subscriptionsByTopic(t) as never)).toEqual(norm(await stock.subscriptionsByTopic(t)));
      }
    }
  });

  it('a PUBREL of another broker instance replaces the queued packet with its identifier, as in the stock store', async () => {
    const ours = new IndexedMemoryPersistence();
    const p = { cmd: 'publish', topic: 't', payload: Buffer.from('1'), qos: 2, brokerId: 'B1', brokerCounter: 1, retain: false, dup: false };
    await ours.outgoingEnqueue({ clientId: 'a' }, p as never);
    await ours.outgoingUpdate({ id: 'a' }, { ...p, messageId: 5 } as never);
    const pubrel = { cmd: 'pubrel', messageId: 5, brokerId: 'B2', brokerCounter: 9 };
    await ours.outgoingUpdate({ id: 'a' }, pubrel as never);
    const q = await drain(ours.outgoingStream({ id: 'a' }));
    expect(q.map((x) => x.cmd)).toEqual(['pubrel']);
    expect(view((await ours.outgoingClearMessageId({ id: 'a' }, { messageId: 5 } as never)) as unknown as Pkt)).toMatchObject({ cmd: 'pubrel', id: 5 });
    expect(ours.outgoingCount('a')).toBe(0);
  });
});

describe('embedded broker with the indexed store', () => {
  let broker: EmbeddedBroker | null = null;
  afterEach(async () => {
    await broker?.close();
    broker = null;
  });

  it('queues QoS 1 messages for an offline persistent session and delivers them in order on reconnect (MQTT 3.1.1 §4.4, §4.6)', async () => {
    broker = await startEmbeddedBroker({ port: 0 });
    const opts = { clientId: 'persist-1', clean: false, protocolVersion: 4 as const, reconnectPeriod: 0 };
    const sub = await mqtt.connectAsync(broker.url, opts);
    await sub.subscribeAsync('q/#', { qos: 1 });
    await sub.endAsync();
    const pub = await mqtt.connectAsync(broker.url, { clientId: 'pub-1', protocolVersion: 4 });
    for (let i = 0; i < 500; i++) await pub.publishAsync(`q/${i % 7}`, String(i), { qos: 1 });
    await pub.endAsync();
    const got: number[] = [];
    const again = mqtt.connect(broker.url, opts);
    again.on('message', (_t, p) => got.push(Number(p.toString())));
    await new Promise<void>((resolve, reject) => {
      const t = setTimeout(() => reject(new Error(`only ${got.length} of 500 redelivered`)), 10_000);
      const check = setInterval(() => {
        if (got.length >= 500) {
          clearInterval(check);
          clearTimeout(t);
          resolve();
        }
      }, 20);
    });
    await again.endAsync();
    expect(got).toEqual(Array.from({ length: 500 }, (_, i) => i));
  });
});
