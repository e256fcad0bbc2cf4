/**
 * ingest/mqtt/mqtt-session.ts against the embedded broker's aedes (with its indexed store, kept
 * across restarts by startTestBroker), no database: what the session promises the connector.
 * Clauses: MQTT 3.1.1 (OASIS Standard, 2014) and MQTT 5.0 (OASIS Standard, 2019).
 */
import http from 'node:http';
import net from 'node:net';
import { Aedes } from 'aedes';
import mqtt, { type MqttClient } from 'mqtt';
import mqttPacket, { type IConnectPacket, type Packet } from 'mqtt-packet';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { createWebSocketStream, WebSocketServer } from 'ws';
import { fallbackProtocol, mqttOptionsOf } from '../../../ingest/mqtt/mqtt-connection.ts';
import { MqttSession, type Delivery, type SessionOptions, type SubscriberSession } from '../../../ingest/mqtt/mqtt-session.ts';
import { MqttJsSession } from '../../../ingest/mqtt/mqttjs-session.ts';
import type { IndexedMemoryPersistence } from '../../../server/broker/indexed-persistence.ts';
import { haveOpenssl, startTlsTestBroker, TLS_BROKER_USER, type TlsTestBroker } from '../../helpers/tls-broker.ts';
import { waitFor } from '../../helpers/wait.ts';
import { freePort, startTestBroker, type TestBroker } from './helpers.ts';

interface Received {
  topic: string;
  payload: string;
  d: Delivery | null;
  connection: number;
}

/** A session with everything it reports recorded. */
function recorded(over: Partial<SessionOptions> & Pick<SessionOptions, 'url' | 'clientId'>) {
  const log = {
    messages: [] as Received[],
    connects: [] as { sessionPresent: boolean; protocol: number }[],
    disconnects: 0,
    errors: [] as { message: string; refused: boolean }[],
    unsent: [] as Delivery[],
  };
  const auto = mqttOptionsOf({ options: {} }).options;
  const session = new MqttSession(
    {
      protocol: 4,
      fallback: (tried, err) => fallbackProtocol(auto, tried, err),
      keepalive_s: 30,
      filters: () => ['s/#'],
      reconnectMinMs: 100,
      ...over,
    },
    {
      message: (topic, payload, d) => log.messages.push({ topic, payload: payload.toString(), d, connection: log.connects.length }),
      connected: (info) => log.connects.push(info),
      disconnected: () => log.disconnects++,
      error: (message, refused) => log.errors.push({ message, refused }),
      unsent: (d) => log.unsent.push(d),
    },
  );
  return { session, log };
}

/**
 * A TCP relay between the session and the broker whose current connections can be frozen:
 * nothing passes either way and nothing is closed, as with a broker host that vanished
 * (power loss, cable pulled) without a FIN or RST reaching ingest.
 */
async function startRelay(target: number) {
  const pairs = new Set<{ down: net.Socket; up: net.Socket; frozen: boolean }>();
  const server = net.createServer((down) => {
    const pair = { down, up: net.connect(target, '127.0.0.1'), frozen: false };
    pairs.add(pair);
    down.on('data', (b) => pair.frozen || pair.up.write(b));
    pair.up.on('data', (b) => pair.frozen || down.write(b));
    const end = () => {
      pairs.delete(pair);
      down.destroy();
      pair.up.destroy();
    };
    down.on('close', end);
    down.on('error', end);
    pair.up.on('close', () => pair.frozen || end());
    pair.up.on('error', () => pair.frozen || end());
  });
  await new Promise<void>((r) => server.listen(0, '127.0.0.1', () => r()));
  return {
    url: `mqtt://127.0.0.1:${(server.address() as net.AddressInfo).port}`,
    freeze: () => pairs.forEach((p) => (p.frozen = true)),
    close: () => {
      pairs.forEach((p) => (p.down.destroy(), p.up.destroy()));
      return new Promise<void>((r) => server.close(() => r()));
    },
  };
}

describe('MqttSession (ingest/mqtt/mqtt-session.ts) against aedes', () => {
  let broker: TestBroker;
  let pub: MqttClient;
  const open: SubscriberSession[] = [];
  /** aedes' connected client by id (its `clients` map is not in its typings). */
  const clientOf = (id: string) => (broker.broker as unknown as { clients: Record<string, { subscriptions: Record<string, unknown>; close(): void } | undefined> }).clients[id];
  const store = () => (broker.broker as unknown as { persistence: IndexedMemoryPersistence }).persistence;
  /** Publishes `n` QoS 1 messages s/<prefix>/<i> with payload i, each acknowledged by the broker. */
  const publish = (prefix: string, n: number, from = 0) => Promise.all(Array.from({ length: n }, (_, i) => pub.publishAsync(`s/${prefix}/${from + i}`, String(from + i), { qos: 1 })));
  const start = (s: SubscriberSession) => (open.push(s), s.start());

  beforeAll(async () => {
    broker = await startTestBroker(await freePort());
    pub = await mqtt.connectAsync(broker.url, { clientId: 'session-it-pub', protocolVersion: 4, reconnectPeriod: 200 });
  });

  afterEach(async () => {
    await Promise.all(open.splice(0).map((s) => s.close()));
  });

  afterAll(async () => {
    await pub?.endAsync().catch(() => {});
    await broker?.close();
  });

  it('acknowledges only what was released: the broker resends the rest after a reconnect (MQTT 3.1.1 §4.4, Clean Session 0)', async () => {
    const clientId = 'session-it-redeliver';
    const { session, log } = recorded({ url: broker.url, clientId, filters: () => ['s/redeliver/#'] });
    start(session);
    await waitFor(() => log.connects.length, (n) => n === 1, { what: 'CONNACK' });
    await waitFor(() => clientOf(clientId)?.subscriptions['s/redeliver/#'], undefined, { what: 'the subscription' });
    await publish('redeliver', 10);
    await waitFor(() => log.messages.length, (n) => n === 10, { what: '10 messages' });
    for (const m of log.messages.slice(0, 5)) session.ack(m.d!);
    // The broker still queues exactly the five it holds no PUBACK for.
    await waitFor(() => store().outgoingCount(clientId), (n) => n === 5, { what: 'five PUBACKs at the broker' });
    clientOf(clientId)!.close();
    await waitFor(() => log.connects.length, (n) => n === 2, { what: 'the reconnect' });
    expect(log.connects[1]!.sessionPresent).toBe(true);
    // Released after their connection closed: reported, never sent on the new connection.
    session.ack(log.messages[5]!.d!);
    expect(log.unsent.map((d) => d.topic)).toEqual(['s/redeliver/5']);
    await waitFor(() => log.messages.length, (n) => n === 15, { what: 'the five redeliveries' });
    const again = log.messages.slice(10);
    expect(again.map((m) => m.payload)).toEqual(['5', '6', '7', '8', '9']);
    for (const m of again) session.ack(m.d!);
    await waitFor(() => store().outgoingCount(clientId), (n) => n === 0, { what: 'the queue drained' });
  });

  it('sends PUBACKs in arrival order, a later release waiting for an earlier one (MQTT 3.1.1 §4.6)', async () => {
    const clientId = 'session-it-order';
    const acked: number[] = [];
    const onAck = (packet: { messageId?: number } | null, client: { id?: string } | null) => {
      if (client?.id === clientId && packet?.messageId !== undefined) acked.push(packet.messageId);
    };
    broker.broker.on('ack', onAck);
    try {
      const { session, log } = recorded({ url: broker.url, clientId, filters: () => ['s/order/#'] });
      start(session);
      await waitFor(() => clientOf(clientId)?.subscriptions['s/order/#'], undefined, { what: 'the subscription' });
      await publish('order', 20);
      await waitFor(() => log.messages.length, (n) => n === 20, { what: '20 messages' });
      expect(log.messages.map((m) => m.payload)).toEqual(Array.from({ length: 20 }, (_, i) => String(i)));
      // Released from last to second: none may leave while the first is held.
      for (const m of log.messages.slice(1).reverse()) session.ack(m.d!);
      // A marker PUBLISH on the session's own connection after the releases: the broker reads a
      // connection's packets in order, so a PUBACK written before the marker reached it first.
      await new Promise((r) => setImmediate(r));
      const marker = new Promise<void>((r) => broker.broker.on('publish', (p: { topic: string }, c: { id?: string } | null) => c?.id === clientId && p.topic === 'marker/order' && r()));
      expect(session.publish('marker/order', Buffer.from('m'))).toBe(true);
      await marker;
      expect(store().outgoingCount(clientId)).toBe(20);
      expect(acked).toEqual([]);
      session.ack(log.messages[0]!.d!);
      await waitFor(() => acked.length, (n) => n === 20, { what: '20 PUBACKs' });
      expect(acked).toEqual(log.messages.map((m) => m.d!.messageId));
      expect(store().outgoingCount(clientId)).toBe(0);
    } finally {
      broker.broker.off('ack', onAck);
    }
  });

  it('stops reading while paused and hands over what arrived meanwhile in order on resume', async () => {
    const clientId = 'session-it-pause';
    const { session, log } = recorded({ url: broker.url, clientId, filters: () => ['s/pause/#'] });
    let pauseAfter = 1;
    const s = session;
    const origin = log.messages.push.bind(log.messages);
    log.messages.push = (...m: Received[]) => {
      const n = origin(...m);
      if (n === pauseAfter) s.pause();
      return n;
    };
    start(session);
    await waitFor(() => clientOf(clientId)?.subscriptions['s/pause/#'], undefined, { what: 'the subscription' });
    await publish('pause', 2_000);
    // Every message is with the broker (it acknowledged each publish); ingest took only the first.
    expect(session.paused).toBe(true);
    expect(log.messages).toHaveLength(1);
    pauseAfter = 1_500;
    session.resume();
    await waitFor(() => log.messages.length, (n) => n === 1_500, { what: 'intake up to the next pause' });
    expect(session.paused).toBe(true);
    expect(log.messages).toHaveLength(1_500);
    session.resume();
    await waitFor(() => log.messages.length, (n) => n === 2_000, { what: 'the rest' });
    expect(log.messages.map((m) => Number(m.payload))).toEqual(Array.from({ length: 2_000 }, (_, i) => i));
    for (const m of log.messages) session.ack(m.d!);
    await waitFor(() => store().outgoingCount(clientId), (n) => n === 0, { what: 'all acknowledged' });
  });

  it('drops a connection whose broker stops answering PINGREQ, then reconnects (Keep Alive, MQTT 3.1.1 §3.1.2.10)', async () => {
    const relay = await startRelay(broker.port);
    try {
      const { session, log } = recorded({ url: relay.url, clientId: 'session-it-keepalive', keepalive_s: 1, filters: () => ['s/keepalive/#'] });
      start(session);
      await waitFor(() => log.connects.length, (n) => n === 1, { what: 'CONNACK' });
      relay.freeze();
      const frozenAt = Date.now();
      // A PINGREQ within 1 s of the freeze and no answer by the next tick: dropped within 2 s.
      await waitFor(() => log.disconnects, (n) => n === 1, { what: 'the dead connection dropped', timeout_ms: 5_000 });
      expect(Date.now() - frozenAt).toBeLessThan(3_000);
      expect(log.errors.map((e) => e.message)).toContain('no answer to PINGREQ within 1 s (Keep Alive)');
      await waitFor(() => log.connects.length, (n) => n === 2, { what: 'the reconnect through a fresh relay connection' });
      expect(session.connected).toBe(true);
    } finally {
      await relay.close();
    }
  });

  it('falls back from MQTT 5.0 to 3.1.1 when the broker refuses 5.0 (5.0 §3.2.2.2, 3.1.1 §3.2.2.3), and stays refused with 5.0 required', async () => {
    // aedes speaks 3.1.1 only and answers a 5.0 CONNECT with return code 1.
    const auto = recorded({ url: broker.url, clientId: 'session-it-auto', protocol: 5 });
    start(auto.session);
    await waitFor(() => auto.log.connects.length, (n) => n === 1, { what: 'CONNACK after the fallback' });
    expect(auto.log.connects[0]!.protocol).toBe(4);
    expect(auto.session.protocol).toBe(4);
    expect(auto.log.errors[0]).toEqual({ message: 'broker refused the connection: reason code 0x1; retrying with MQTT 3.1.1', refused: false });

    const five = mqttOptionsOf({ options: { protocolVersion: 5 } }).options;
    const strict = recorded({ url: broker.url, clientId: 'session-it-five', protocol: 5, fallback: (tried, err) => fallbackProtocol(five, tried, err) });
    start(strict.session);
    await waitFor(() => strict.log.errors.length, (n) => n >= 2, { what: 'two refused attempts (back-off retries)' });
    expect(strict.log.errors[0]).toEqual({ message: 'broker refused the connection: reason code 0x1', refused: true });
    expect(strict.log.connects).toHaveLength(0);
    expect(strict.session.protocol).toBe(5);
  });

  it('reconnects after a broker restart with its session kept, and receives again', async () => {
    const clientId = 'session-it-restart';
    const { session, log } = recorded({ url: broker.url, clientId, filters: () => ['s/restart/#'] });
    start(session);
    await waitFor(() => log.connects.length, (n) => n === 1, { what: 'CONNACK' });
    await waitFor(() => clientOf(clientId)?.subscriptions['s/restart/#'], undefined, { what: 'the subscription' });
    await broker.restart(() => log.disconnects === 1);
    await waitFor(() => log.connects.length, (n) => n === 2, { what: 'the reconnect', timeout_ms: 15_000 });
    expect(log.connects[1]!.sessionPresent).toBe(true);
    await waitFor(() => pub.connected, undefined, { what: 'the publisher back' });
    await publish('restart', 3);
    await waitFor(() => log.messages.length, (n) => n === 3, { what: 'messages after the restart' });
    for (const m of log.messages) session.ack(m.d!);
    await waitFor(() => store().outgoingCount(clientId), (n) => n === 0, { what: 'all acknowledged' });
  });

  it('reports a refused subscription from the SUBACK (3.1.1 §3.9.3: 0x80)', async () => {
    const b = broker.broker as unknown as { authorizeSubscribe: (c: unknown, sub: { topic: string }, cb: (err: Error | null, sub: unknown) => void) => void };
    const before = b.authorizeSubscribe;
    b.authorizeSubscribe = (c, sub, cb) => cb(null, sub.topic.startsWith('denied/') ? null : sub);
    try {
      const { session, log } = recorded({ url: broker.url, clientId: 'session-it-suback', filters: () => ['s/ok/#', 'denied/#'] });
      start(session);
      await waitFor(() => log.errors.length, (n) => n === 1, { what: 'the refusal' });
      expect(log.errors[0]).toEqual({ message: 'subscription refused: denied/# (0x80)', refused: false });
    } finally {
      b.authorizeSubscribe = before;
    }
  });

  it('publishes at QoS 0 and ends with a DISCONNECT (3.1.1 §3.14)', async () => {
    const clientId = 'session-it-publish';
    const spy = await mqtt.connectAsync(broker.url, { clientId: 'session-it-spy', protocolVersion: 4 });
    try {
      const got: { topic: string; qos: number; retain: boolean }[] = [];
      spy.on('message', (topic, _p, packet) => got.push({ topic, qos: packet.qos, retain: packet.retain }));
      await spy.subscribeAsync('ncmd/#', { qos: 1 });
      const { session, log } = recorded({ url: broker.url, clientId });
      expect(session.publish('ncmd/early', Buffer.from('x'))).toBe(false);
      start(session);
      await waitFor(() => log.connects.length, (n) => n === 1, { what: 'CONNACK' });
      expect(session.publish('ncmd/KB1', Buffer.from('rebirth'))).toBe(true);
      await waitFor(() => got.length, (n) => n === 1, { what: 'the publish at the spy' });
      expect(got[0]).toEqual({ topic: 'ncmd/KB1', qos: 0, retain: false });
      const clientErrors: string[] = [];
      const onErr = (c: { id?: string } | null) => c?.id === clientId && clientErrors.push(c.id);
      broker.broker.on('clientError', onErr);
      const gone = new Promise<void>((r) => broker.broker.on('clientDisconnect', (c: { id?: string }) => c.id === clientId && r()));
      await session.close();
      open.splice(open.indexOf(session), 1);
      await gone;
      broker.broker.off('clientError', onErr);
      expect(clientErrors).toEqual([]);
      expect(log.disconnects).toBe(0);
    } finally {
      await spy.endAsync();
    }
  });

  it('the mqtt.js session (the --stock reference) holds each PUBACK until released, one message at a time', async () => {
    // mqtt.js README, Client#handleMessage: one message at a time, the next after the callback.
    const clientId = 'session-it-mqttjs';
    const got: Delivery[] = [];
    const connects: number[] = [];
    const session = new MqttJsSession(
      {
        url: broker.url,
        protocol: 4,
        fallback: () => null,
        filters: () => ['s/mqttjs/#'],
        clientOptions: (protocolVersion) => ({ protocolVersion, clientId, clean: false, keepalive: 30 }),
      },
      { message: (_t, _p, d) => d && got.push(d), connected: ({ protocol }) => connects.push(protocol), disconnected: () => {}, error: () => {}, unsent: () => {} },
    );
    open.push(session);
    session.start();
    await waitFor(() => clientOf(clientId)?.subscriptions['s/mqttjs/#'], undefined, { what: 'the subscription' });
    await publish('mqttjs', 3);
    await waitFor(() => got.length, (n) => n === 1, { what: 'the first message' });
    // Held: the broker still queues all three, and mqtt.js reads nothing further.
    expect(store().outgoingCount(clientId)).toBe(3);
    for (let i = 0; i < 3; i++) {
      expect(got).toHaveLength(i + 1);
      session.ack(got[i]!);
      await waitFor(() => store().outgoingCount(clientId), (n) => n === 2 - i, { what: `PUBACK ${i + 1}` });
      if (i < 2) await waitFor(() => got.length, (n) => n === i + 2, { what: `message ${i + 2}` });
    }
    expect(got.map((d) => d.topic)).toEqual(['s/mqttjs/0', 's/mqttjs/1', 's/mqttjs/2']);
  });
});

describe('MqttSession over mqtts://', () => {
  let broker: TlsTestBroker | null = null;
  let url = '';
  let ca = '';
  const sessions: MqttSession[] = [];

  beforeAll(async () => {
    if (!haveOpenssl) return;
    broker = await startTlsTestBroker();
    ({ url, ca } = broker);
  });
  afterAll(async () => {
    await Promise.all(sessions.map((s) => s.close()));
    await broker?.close();
  });

  it.skipIf(!haveOpenssl)('connects with the source’s CA and credentials; refuses an unknown CA and a wrong password', async () => {
    const good = recorded({ url, clientId: 'tls-good', ...TLS_BROKER_USER, ca });
    const noCa = recorded({ url, clientId: 'tls-no-ca', ...TLS_BROKER_USER });
    const badPassword = recorded({ url, clientId: 'tls-bad-pw', username: TLS_BROKER_USER.username, password: 'wrong', ca });
    for (const x of [good, noCa, badPassword]) {
      sessions.push(x.session);
      x.session.start();
    }
    await waitFor(() => good.log.connects.length, (n) => n === 1, { what: 'CONNACK over TLS' });
    await waitFor(() => noCa.log.errors.length, (n) => n >= 1, { what: 'the certificate refused' });
    expect(noCa.log.errors[0]!.message).toMatch(/self[- ]signed|certificate/i);
    expect(noCa.log.connects).toHaveLength(0);
    // MQTT 3.1.1 §3.2.2.3: aedes answers a failed authenticate with return code 5, not authorized.
    await waitFor(() => badPassword.log.errors.length, (n) => n >= 1, { what: 'the CONNECT refused' });
    expect(badPassword.log.errors[0]).toEqual({ message: 'broker refused the connection: not authorized', refused: true });
  });
});

describe('MqttSession over WebSocket (ws://, MQTT 3.1.1 §6)', () => {
  let wsBroker: Aedes;
  let server: http.Server;
  let wss: WebSocketServer;
  let pub: MqttClient;
  let session: MqttSession | null = null;
  let url = '';

  beforeAll(async () => {
    wsBroker = await Aedes.createBroker();
    server = http.createServer();
    // Binary frames with the "mqtt" subprotocol, each WebSocket handed to aedes as a stream.
    wss = new WebSocketServer({ server, path: '/mqtt', handleProtocols: (p) => (p.has('mqtt') ? 'mqtt' : false) });
    wss.on('connection', (ws) => wsBroker.handle(createWebSocketStream(ws)));
    const port = await new Promise<number>((resolve) => server.listen(0, '127.0.0.1', () => resolve((server.address() as net.AddressInfo).port)));
    url = `ws://127.0.0.1:${port}/mqtt`;
    pub = await mqtt.connectAsync(url, { clientId: 'ws-it-pub', protocolVersion: 4, reconnectPeriod: 200 });
  });
  afterAll(async () => {
    await session?.close();
    await pub?.endAsync().catch(() => {});
    wss?.close();
    await new Promise<void>((r) => wsBroker.close(() => r()));
    await new Promise<void>((r) => server.close(() => r()));
  });

  it('subscribes, reads on while PUBACKs are held, and the broker holds exactly the unreleased ones', async () => {
    const clientId = 'ws-it-session';
    const { session: s, log } = recorded({ url, clientId, filters: () => ['w/#'] });
    session = s;
    s.start();
    await waitFor(() => log.connects.length, (n) => n === 1, { what: 'CONNACK over WebSocket' });
    const subscribed = () => (wsBroker as unknown as { clients: Record<string, { subscriptions: Record<string, unknown> } | undefined> }).clients[clientId]?.subscriptions['w/#'];
    await waitFor(subscribed, undefined, { what: 'the subscription' });
    await Promise.all(Array.from({ length: 200 }, (_, i) => pub.publishAsync(`w/${i}`, String(i), { qos: 1 })));
    // All 200 arrive with none released: intake does not wait for acknowledgements.
    await waitFor(() => log.messages.length, (n) => n === 200, { what: '200 messages with every PUBACK held' });
    expect(log.messages.map((m) => m.payload)).toEqual(Array.from({ length: 200 }, (_, i) => String(i)));
    const acked: number[] = [];
    wsBroker.on('ack', (packet, client) => {
      if (client?.id === clientId && packet && 'messageId' in packet && packet.messageId !== undefined) acked.push(packet.messageId);
    });
    for (const m of log.messages.slice(0, 150)) s.ack(m.d!);
    await waitFor(() => acked.length, (n) => n === 150, { what: '150 PUBACKs at the broker' });
    expect(acked).toEqual(log.messages.slice(0, 150).map((m) => m.d!.messageId));
    expect(log.errors).toEqual([]);
  });
});

/**
 * aedes speaks 3.1.1 only, so the MQTT 5.0 side of the session is checked against a scripted
 * broker built on the same mqtt-packet parser and generator: each packet the session sends is
 * read as a 5.0 server reads it.
 */
describe('MqttSession speaking MQTT 5.0', () => {
  it('sends the 5.0 CONNECT properties, honours Server Keep Alive, acknowledges with 5.0 PUBACKs and reconnects after a server DISCONNECT', async () => {
    const seen: Packet[] = [];
    const conns: net.Socket[] = [];
    const server = net.createServer((sock) => {
      conns.push(sock);
      const parser = mqttPacket.parser({ protocolVersion: 5 });
      const send = (p: Packet) => sock.write(mqttPacket.generate(p, { protocolVersion: 5 }));
      parser.on('packet', (p: Packet) => {
        seen.push(p);
        if (p.cmd === 'connect') send({ cmd: 'connack', sessionPresent: conns.length > 1, reasonCode: 0, properties: { serverKeepAlive: 1 } });
        if (p.cmd === 'subscribe') {
          send({ cmd: 'suback', messageId: p.messageId!, granted: [1] });
          send({ cmd: 'publish', topic: 'v5/a', payload: Buffer.from('1'), qos: 1, messageId: 7, dup: false, retain: false, properties: { userProperties: { site: 'kb' } } });
        }
        if (p.cmd === 'pingreq') send({ cmd: 'pingresp' });
      });
      sock.on('data', (b) => parser.parse(b));
      sock.on('error', () => {});
    });
    await new Promise<void>((r) => server.listen(0, '127.0.0.1', () => r()));
    const url = `mqtt://127.0.0.1:${(server.address() as net.AddressInfo).port}`;
    const { session, log } = recorded({ url, clientId: 'v5-session', protocol: 5, keepalive_s: 30, username: 'ingest', password: 'pw', filters: () => ['v5/#'] });
    session.start();
    try {
      await waitFor(() => log.messages.length, (n) => n === 1, { what: 'the 5.0 PUBLISH' });
      const connect = seen.find((p) => p.cmd === 'connect') as IConnectPacket;
      // MQTT 5.0 §3.1.2.4 Clean Start 0, §3.1.2.11.2 Session Expiry 0xFFFFFFFF, §3.1.2.11.3 Receive Maximum.
      expect(connect).toMatchObject({ protocolVersion: 5, clean: false, clientId: 'v5-session', keepalive: 30, username: 'ingest', properties: { sessionExpiryInterval: 0xffffffff, receiveMaximum: 65_535 } });
      expect(connect.password?.toString()).toBe('pw');
      expect(seen.find((p) => p.cmd === 'subscribe')).toMatchObject({ subscriptions: [{ topic: 'v5/#', qos: 1 }] });
      expect(log.messages[0]).toMatchObject({ topic: 'v5/a', payload: '1' });
      session.ack(log.messages[0]!.d!);
      await waitFor(() => seen.find((p) => p.cmd === 'puback'), undefined, { what: 'the PUBACK' });
      expect(seen.find((p) => p.cmd === 'puback')).toMatchObject({ messageId: 7 });
      // §3.2.2.3.14: Server Keep Alive 1 s replaces the 30 s asked for.
      await waitFor(() => seen.some((p) => p.cmd === 'pingreq'), undefined, { what: 'a PINGREQ within the server keep alive', timeout_ms: 3_000 });
      // §3.14: a server DISCONNECT (0x8B Server shutting down) ends the connection; the session reconnects.
      conns[0]!.write(mqttPacket.generate({ cmd: 'disconnect', reasonCode: 0x8b }, { protocolVersion: 5 }));
      await waitFor(() => log.connects.length, (n) => n === 2, { what: 'the reconnect' });
      expect(log.errors.map((e) => e.message)).toContain('broker disconnected: reason code 0x8b');
    } finally {
      await session.close();
      conns.forEach((c) => c.destroy());
      await new Promise<void>((r) => server.close(() => r()));
    }
  });
});
