/**
 * Load child of the ingest benchmark, run in a process of its own so that publishing does not
 * share a thread with the broker (in a plant the publishers are other machines):
 *
 *   mqtt-load.ts publish <url> single <n> <qos> <dayStartMs>   one JSON value per message
 *   mqtt-load.ts publish <url> batched <messages> <per> <baseMs>  batched JSON, QoS 1
 *   mqtt-load.ts sink <url> <n>                                  counts n QoS 1 messages on b/#
 *
 * Prints JSON lines: {start} (absolute ms, performance.timeOrigin + now()) when publishing
 * begins, then what it measured. Tags are b/tag0 … b/tag999, as in the benchmark.
 */
import net from 'node:net';
import mqtt from 'mqtt';
import mqttPacket from 'mqtt-packet';

const TAGS = 1_000;
const [role, url, ...rest] = process.argv.slice(2);
/** CPU time when the load began: the figures count the phase, not start-up and encoding. */
let cpuAtStart: NodeJS.CpuUsage | undefined;
function markStart(): void {
  cpuAtStart = process.cpuUsage();
  console.log(JSON.stringify({ start: performance.timeOrigin + performance.now() }));
}
function cpuSec(): number {
  const u = process.cpuUsage(cpuAtStart);
  return (u.user + u.system) / 1e6;
}
if (!role || !url) throw new Error('usage: mqtt-load.ts publish|sink <url> …');

/** Publishing with at most `window` messages awaiting their PUBACK (QoS 1), or none (QoS 0). */
async function publishAll(c: mqtt.MqttClient, n: number, qos: 0 | 1, make: (k: number) => [string, string | Buffer], window: number): Promise<void> {
  let next = 0;
  const worker = async () => {
    while (next < n) {
      const k = next++;
      const [t, p] = make(k);
      await c.publishAsync(t, p, { qos });
    }
  };
  await Promise.all(Array.from({ length: window }, worker));
}

/**
 * A lean MQTT 3.1.1 publisher on a raw socket: every PUBLISH packet is encoded (mqtt-packet)
 * before the clock starts, then written in chunks of 256 with at most `window` QoS 1 messages
 * awaiting their PUBACK; the broker's answers (CONNACK, then 4-byte PUBACKs, MQTT 3.1.1 §3.4)
 * are read by hand. A load generator must not be what limits the figure: in a plant the
 * publishers are other machines, here they share 2 cores with broker, ingest and database.
 * mqtt.js with a promise per message spent about 23 µs of CPU per message, encoding while
 * publishing about 13 µs, this about 2 µs.
 */
async function rawPublish(n: number, qos: 0 | 1, make: (k: number) => [string, string | Buffer], window: number): Promise<void> {
  const u = new URL(url!);
  const packets: Buffer[] = new Array(n);
  for (let k = 0, id = 0; k < n; k++) {
    const [topic, payload] = make(k);
    if (qos === 1) {
      id = (id % 65_535) + 1;
      packets[k] = mqttPacket.generate({ cmd: 'publish', topic, payload, qos: 1, messageId: id, retain: false, dup: false });
    } else packets[k] = mqttPacket.generate({ cmd: 'publish', topic, payload, qos: 0, retain: false, dup: false });
  }
  const sock = net.connect(Number(u.port || 1883), u.hostname);
  sock.setNoDelay(true);
  let inFlight = 0;
  let acked = 0;
  let wake: (() => void) | null = null;
  let connected!: () => void;
  const connack = new Promise<void>((r) => (connected = r));
  let rest: Buffer = Buffer.alloc(0);
  sock.on('data', (d: Buffer) => {
    const b = rest.length ? Buffer.concat([rest, d]) : d;
    let i = 0;
    // The broker sends this client nothing but CONNACK (0x20) and PUBACK (0x40), each 4 bytes.
    for (; i + 4 <= b.length; i += 4) {
      const type = b[i]! >> 4;
      if (b[i + 1] !== 2 || (type !== 2 && type !== 4)) throw new Error(`unexpected packet 0x${b[i]!.toString(16)} from the broker`);
      if (type === 2) connected();
      else {
        inFlight--;
        acked++;
      }
    }
    rest = b.subarray(i);
    wake?.();
  });
  await new Promise<void>((r) => sock.once('connect', () => r()));
  sock.write(mqttPacket.generate({ cmd: 'connect', protocolId: 'MQTT', protocolVersion: 4, clean: true, clientId: `bench-raw-${process.pid}`, keepalive: 60 }));
  await connack;
  markStart();
  for (let k = 0; k < n; ) {
    const from = k;
    while (k < n && k - from < 256 && (qos === 0 || inFlight < window)) {
      k++;
      if (qos === 1) inFlight++;
    }
    if (k > from && !sock.write(Buffer.concat(packets.slice(from, k)))) await new Promise((r) => sock.once('drain', r));
    if (qos === 1 && inFlight >= window) await new Promise<void>((r) => (wake = r));
    wake = null;
  }
  while (qos === 1 && acked < n) await new Promise<void>((r) => (wake = r));
  sock.end(mqttPacket.generate({ cmd: 'disconnect' }));
}

if (role === 'publish') {
  const [mode, a, b, c0] = rest;
  const t = performance.now();
  let n: number;
  if (mode === 'single') {
    n = Number(a);
    const qos = Number(b) as 0 | 1;
    const day = Number(c0);
    await rawPublish(n, qos, (k) => [`b/tag${k % TAGS}`, `{"v":${k},"ts":"${new Date(day + Math.floor(k / TAGS) * 100).toISOString()}"}`], 2_000);
  } else if (mode === 'batched') {
    const messages = Number(a);
    const per = Number(b);
    const base = Number(c0);
    n = messages * per;
    const payloads: Buffer[] = [];
    for (let m = 0; m < messages; m++) {
      const samples = [];
      for (let j = 0; j < per; j++) {
        const k = m * per + j;
        samples.push({ topic: `b/tag${k % TAGS}`, v: k, ts: new Date(base + Math.floor(k / TAGS) * 10).toISOString() });
      }
      payloads.push(Buffer.from(JSON.stringify({ samples })));
    }
    const c = await mqtt.connectAsync(url, { clientId: `bench-pub-${process.pid}`, protocolVersion: 4 });
    c.setMaxListeners(0);
    markStart();
    await publishAll(c, messages, 1, (m) => ['b/batch', payloads[m]!], 50);
    await c.endAsync();
  } else {
    throw new Error(`unknown mode ${mode}`);
  }
  console.log(JSON.stringify({ published: n, publishSec: (performance.now() - t) / 1000, cpuSec: cpuSec() }));
  process.exit(0);
} else if (role === 'sink') {
  const n = Number(rest[0]);
  const c = await mqtt.connectAsync(url, { clientId: `bench-sink-${process.pid}`, protocolVersion: 4, clean: true });
  await c.subscribeAsync('b/#', { qos: 1 });
  let got = 0;
  let t0 = 0;
  c.on('message', () => {
    if (got++ === 0) t0 = performance.now();
    if (got === n) {
      console.log(JSON.stringify({ received: n, receiveSec: (performance.now() - t0) / 1000, end: performance.timeOrigin + performance.now(), cpuSec: cpuSec() }));
      process.exit(0);
    }
  });
  cpuAtStart = process.cpuUsage();
  console.log(JSON.stringify({ ready: true }));
} else {
  throw new Error(`unknown role ${role}`);
}
