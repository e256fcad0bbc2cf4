import { spawn, type ChildProcess } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import mqtt, { type MqttClient } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { testMqttConnection } from '../../ingest/mqtt/mqtt-connection.ts';
import { addBrokerUser, createBrokerAuth, ensureBrokerCredentials, type BrokerCredentials } from '../../server/broker/broker-users.ts';
import { startEmbeddedBroker, type EmbeddedBroker } from '../../server/broker/embedded-broker.ts';
import { BROKER_READY } from '../../server/broker/process.ts';
import { freePort } from '../helpers/net.ts';
import { nextEvent, waitFor } from '../helpers/wait.ts';
import { haveOpenssl, startTlsTestBroker, TLS_BROKER_USER, type TlsTestBroker } from '../helpers/tls-broker.ts';

/**
 * The embedded broker as `npm start` runs it (issue 15 item 9): users and an ACL, a maximum
 * packet size, and the QoS 1 queue of a persistent session kept across a broker killed with
 * SIGKILL. Expected answers are MQTT 3.1.1's (OASIS Standard, 2014): CONNACK return code 4 "bad
 * user name or password" (§3.2.2.3), SUBACK return code 0x80 "failure" (§3.9.3), a refused
 * PUBLISH answered by closing the network connection (§4.8; 3.1.1 has no negative PUBACK), and a
 * persistent session (Clean Session 0, §3.1.2.4) receiving the QoS 1 messages queued for it
 * (§4.4) after it reconnects.
 */
const root = path.resolve(import.meta.dirname, '../..');
const dataDir = fs.mkdtempSync(path.join(os.tmpdir(), 'flocstream-broker-'));
let creds: BrokerCredentials;
let broker: EmbeddedBroker;
const clients: MqttClient[] = [];

function connect(url: string, opts: mqtt.IClientOptions): Promise<MqttClient> {
  const c = mqtt.connect(url, { protocolVersion: 4, reconnectPeriod: 0, connectTimeout: 5000, ...opts });
  clients.push(c);
  return new Promise((resolve, reject) => {
    c.once('connect', () => resolve(c));
    c.once('error', reject);
  });
}

/** The next 'close' of a client (its connection closed by the broker), within 10 s. */
function closeOf(c: MqttClient): Promise<void> {
  return new Promise((resolve, reject) => {
    const t = setTimeout(() => reject(new Error('the broker did not close the connection within 10 s')), 10_000);
    c.once('close', () => {
      clearTimeout(t);
      resolve();
    });
  });
}

/** The topic of the next message a client receives, within 10 s. */
function topicOf(c: MqttClient): Promise<string> {
  return new Promise((resolve, reject) => {
    const t = setTimeout(() => reject(new Error('no message within 10 s')), 10_000);
    c.once('message', (topic) => {
      clearTimeout(t);
      resolve(topic);
    });
  });
}

beforeAll(async () => {
  creds = ensureBrokerCredentials(dataDir, ['kb/#']);
  broker = await startEmbeddedBroker({ port: 0, auth: createBrokerAuth(dataDir), maxPacketBytes: 4096 });
});

afterAll(async () => {
  for (const c of clients) c.end(true);
  await broker.close();
  fs.rmSync(dataDir, { recursive: true, force: true });
});

describe('embedded broker: users and ACL', () => {
  it('keeps the generated credentials readable by their owner only', () => {
    for (const f of ['credentials.json', 'simulator.password']) expect(fs.statSync(path.join(dataDir, 'broker', f)).mode & 0o777, f).toBe(0o600);
    expect(fs.statSync(path.join(dataDir, 'broker')).mode & 0o777).toBe(0o700);
    // A second start keeps the passwords.
    expect(ensureBrokerCredentials(dataDir, ['kb/#']).ingest.password).toBe(creds.ingest.password);
  });

  it('refuses a client without credentials or with a wrong password (CONNACK 4)', async () => {
    await expect(connect(broker.url, {})).rejects.toMatchObject({ code: 4 });
    await expect(connect(broker.url, { username: 'ingest', password: 'not-the-password' })).rejects.toMatchObject({ code: 4 });
    await expect(connect(broker.url, { username: 'nobody', password: creds.ingest.password })).rejects.toMatchObject({ code: 4 });
  });

  it('lets ingest subscribe and the simulator publish its plant’s topics, and nothing else', async () => {
    const ingest = await connect(broker.url, { username: 'ingest', password: creds.ingest.password, clientId: 'acl-ingest' });
    const granted = await ingest.subscribeAsync('#', { qos: 1 });
    expect(granted[0]!.qos).toBe(1);
    const sim = await connect(broker.url, { username: 'simulator', password: creds.simulator.password, clientId: 'acl-sim' });
    // The simulator may not subscribe: SUBACK 0x80.
    await expect(sim.subscribeAsync('kb/#', { qos: 1 })).rejects.toMatchObject({ packet: { granted: [128] } });
    const got = topicOf(ingest);
    await sim.publishAsync('kb/ab1/AIT-101', '{"v":3.4}', { qos: 1 });
    expect(await got).toBe('kb/ab1/AIT-101');
    // Another plant's topic: no PUBACK, the connection is closed.
    const closed = closeOf(sim);
    sim.publish('other/ab1/AIT-101', '{"v":9}', { qos: 1 });
    await closed;
    // Ingest may not publish (a forged value would reach every subscriber).
    const ingestClosed = closeOf(ingest);
    ingest.publish('kb/ab1/AIT-101', '{"v":1}', { qos: 1 });
    await ingestClosed;
  });

  it('admits a user added with broker-user, hashed, within its topic filters', async () => {
    const password = addBrokerUser(dataDir, { name: 'kb-gateway', publish: ['kb/gw/#'], subscribe: [] });
    const stored = fs.readFileSync(path.join(dataDir, 'broker', 'users.json'), 'utf8');
    expect(stored).not.toContain(password);
    expect(fs.statSync(path.join(dataDir, 'broker', 'users.json')).mode & 0o777).toBe(0o600);
    const ingest = await connect(broker.url, { username: 'ingest', password: creds.ingest.password, clientId: 'acl-ingest-2' });
    await ingest.subscribeAsync('kb/#', { qos: 1 });
    const gw = await connect(broker.url, { username: 'kb-gateway', password, clientId: 'acl-gw' });
    const got = topicOf(ingest);
    await gw.publishAsync('kb/gw/FIT-001', '{"v":410}', { qos: 1 });
    expect(await got).toBe('kb/gw/FIT-001');
    const closed = closeOf(gw);
    gw.publish('kb/ab1/AIT-101', '{"v":1}', { qos: 1 });
    await closed;
    await expect(connect(broker.url, { username: 'kb-gateway', password: `${password}x` })).rejects.toMatchObject({ code: 4 });
  });

  it('closes a connection sending a packet over the limit and delivers nothing of it', async () => {
    const ingest = await connect(broker.url, { username: 'ingest', password: creds.ingest.password, clientId: 'size-ingest' });
    await ingest.subscribeAsync('kb/#', { qos: 1 });
    const received: string[] = [];
    ingest.on('message', (t) => received.push(t));
    const sim = await connect(broker.url, { username: 'simulator', password: creds.simulator.password, clientId: 'size-sim' });
    // 2 + 2 + 8 (topic) + 4000 = 4012 bytes: under 4096.
    await sim.publishAsync('kb/small', Buffer.alloc(4000, 0x31), { qos: 1 });
    const closed = closeOf(sim);
    sim.publish('kb/large', Buffer.alloc(5000, 0x31), { qos: 1 });
    await closed;
    // A later message on another connection arrives after anything the large one could have become.
    const sim2 = await connect(broker.url, { username: 'simulator', password: creds.simulator.password, clientId: 'size-sim-2' });
    await sim2.publishAsync('kb/after', '1', { qos: 1 });
    await waitFor(() => received.includes('kb/after'), undefined, { what: 'kb/after delivered' });
    expect(received).toEqual(['kb/small', 'kb/after']);
  });
});

describe('embedded broker process: the QoS 1 queue survives SIGKILL', () => {
  let proc: ChildProcess | null = null;
  const startProcess = async (port: number) => {
    proc = spawn(process.execPath, ['--import', 'tsx', path.join(root, 'server/broker/main.ts'), '127.0.0.1', String(port), '--data-dir', dataDir], { cwd: root, stdio: ['ignore', 'pipe', 'pipe'] });
    const lines: string[] = [];
    proc.stdout!.on('data', (b: Buffer) => lines.push(...b.toString().split('\n')));
    await waitFor(() => lines.find((l) => BROKER_READY.test(l)), undefined, { what: 'the broker ready line', timeout_ms: 30_000 });
    return lines;
  };
  afterAll(() => {
    proc?.kill('SIGKILL');
  });

  it('delivers every acknowledged message to the persistent session after a kill and restart', async () => {
    const port = await freePort();
    const url = `mqtt://127.0.0.1:${port}`;
    await startProcess(port);
    // Ingest's persistent session subscribes, then goes away (as while it restarts).
    const ingest = await connect(url, { username: 'ingest', password: creds.ingest.password, clientId: 'durable-ingest', clean: false });
    await ingest.subscribeAsync('kb/#', { qos: 1 });
    await ingest.endAsync();
    const sim = await connect(url, { username: 'simulator', password: creds.simulator.password, clientId: 'durable-sim' });
    const N = 200;
    for (let i = 0; i < N; i++) await sim.publishAsync(`kb/t/${i % 7}`, JSON.stringify({ v: i }), { qos: 1 });
    await sim.endAsync();
    // Every PUBACK came back; the log is written at the end of each turn of the broker's event loop.
    const log = path.join(dataDir, 'broker', 'queue.log');
    await waitFor(() => fs.readFileSync(log, 'utf8').split('\n').filter((l) => l.startsWith('{"k":"enq"')).length, (n) => n === N, { what: 'the queue log holding every message' });
    proc!.kill('SIGKILL');
    await nextEvent(proc!, 'exit');
    const lines = await startProcess(port);
    expect(lines.join('\n')).toContain(`restored ${N} queued messages for 1 persistent sessions`);
    const values: number[] = [];
    const again = mqtt.connect(url, { protocolVersion: 4, reconnectPeriod: 0, username: 'ingest', password: creds.ingest.password, clientId: 'durable-ingest', clean: false });
    clients.push(again);
    again.on('message', (_t, p) => values.push((JSON.parse(p.toString()) as { v: number }).v));
    await waitFor(() => values.length, (n) => n >= N, { what: `${N} messages redelivered`, timeout_ms: 20_000 });
    // Each once, in order (§4.6 ordering of one publisher's QoS 1 messages on its topics).
    expect(values).toEqual(Array.from({ length: N }, (_, i) => i));
    await again.endAsync();
    // Acknowledged messages leave the queue: a clean stop and start restores none.
    proc!.kill('SIGTERM');
    await nextEvent(proc!, 'exit');
    const third = await startProcess(port);
    expect(third.join('\n')).not.toContain('restored');
  });
});

describe('external broker over TLS with credentials (mqtts://, source CA)', () => {
  let broker: TlsTestBroker | null = null;
  beforeAll(async () => {
    if (haveOpenssl) broker = await startTlsTestBroker();
  });
  afterAll(async () => broker?.close());

  it.skipIf(!haveOpenssl)('connects with the source’s CA and credentials, and fails without the CA or with a wrong password', async () => {
    const source = { id: 1, url: broker!.url, username: TLS_BROKER_USER.username, secret: TLS_BROKER_USER.password, options: { protocolVersion: 4, tlsCa_pem: broker!.ca } };
    expect(await testMqttConnection(source, 5000)).toMatchObject({ ok: true });
    const noCa = await testMqttConnection({ ...source, options: { protocolVersion: 4 } }, 5000);
    expect(noCa.ok).toBe(false);
    expect(noCa.error).toMatch(/self[- ]signed|certificate/i);
    expect(await testMqttConnection({ ...source, secret: 'wrong' }, 5000)).toMatchObject({ ok: false });
  });
});
