/**
 * Ingest's MQTT subscriber session over a socket of its own (node:net for mqtt://, node:tls for
 * mqtts://, the `ws` package's WebSocket as a stream for ws:// and wss://), speaking MQTT through mqtt-packet's public API only: `parser()` with its 'packet'
 * and 'error' events, and `generate()`. It exists because ingest acknowledges a QoS 1 PUBLISH
 * only once its rows are committed, and thousands of messages are in flight per commit: mqtt.js
 * handles incoming packets one at a time and reads the next only after the current one's
 * `handleMessage` callback, so holding that callback until the commit (its documented way,
 * ./mqttjs-session.ts) admits one message per commit. Here the socket is read on, and the
 * PUBACKs a commit releases leave later, in arrival order, as one write.
 *
 * What it does, and only that: CONNECT with a fixed Client Identifier and Clean Start 0,
 * CONNACK (with the caller's 5.0 → 3.1.1 fallback), SUBSCRIBE at QoS 1 after every CONNACK,
 * PUBLISH QoS 0 and 1 in, held PUBACKs out, PINGREQ keep-alive with a dead-connection timeout,
 * reconnect with back-off, read backpressure, QoS 0 PUBLISH out, DISCONNECT. QoS 2 is not
 * needed: every subscription asks for QoS 1, and the broker delivers at most the granted QoS
 * (MQTT 3.1.1 §3.8.4, MQTT 5.0 §3.8.4), so a QoS 2 PUBLISH is a protocol error here.
 * MQTT 5.0 Topic Aliases are never received: the CONNECT sets no Topic Alias Maximum, so its
 * default of 0 forbids the server to send any (§3.1.2.11.8).
 */
import net from 'node:net';
import tls from 'node:tls';
import type { Duplex } from 'node:stream';
import { createWebSocketStream, WebSocket } from 'ws';
import mqttPacket, { type IConnackPacket, type IConnectPacket, type IPublishPacket, type ISubackPacket, type Packet } from 'mqtt-packet';
import type { ProtocolLevel } from './mqtt-connection.ts';

/** A received QoS 1 PUBLISH whose PUBACK waits for `MqttSession.ack` (or a QoS 0 one: null). */
export interface Delivery {
  readonly messageId: number;
  readonly topic: string;
  readonly payload: Buffer;
  /** The connection it arrived on; its PUBACK can only go on that one. */
  readonly connection: number;
  /** Released by the caller (committed, or nothing to store). */
  done: boolean;
}

/** What the session tells its owner. Every call is synchronous and in the order things happened. */
export interface SessionEvents {
  /** A PUBLISH, in arrival order. `delivery` is null for QoS 0 (nothing to acknowledge). */
  message(topic: string, payload: Buffer, delivery: Delivery | null): void;
  connected(info: { sessionPresent: boolean; protocol: ProtocolLevel }): void;
  /** The connection ended, after its CONNACK or before; the session reconnects (never after close()). */
  disconnected(wasOpen: boolean): void;
  /** A reason for the status; `refused` when the broker refused the CONNECT. */
  error(message: string, refused: boolean): void;
  /** A released delivery whose PUBACK could not be sent because its connection had closed. */
  unsent(d: Delivery): void;
}

/**
 * What MqttConnector needs of a subscriber session: this module's MqttSession, or the mqtt.js
 * one (./mqttjs-session.ts), the benchmark's stock reference.
 */
export interface SubscriberSession {
  readonly protocol: ProtocolLevel;
  readonly paused: boolean;
  readonly connected: boolean;
  start(): void;
  ack(d: Delivery): void;
  publish(topic: string, payload: Buffer): boolean;
  pause(): void;
  resume(): void;
  /** `endSession`: on 5.0, DISCONNECT with Session Expiry Interval 0, so the broker ends the session (MQTT 5.0 §3.14.2.2.2). */
  close(endSession?: boolean): Promise<void>;
}

export interface SessionOptions {
  /** mqtt:// or mqtts:// (default ports 1883 and 8883, IANA), ws:// or wss:// (MQTT over WebSocket, the path as given). */
  url: string;
  clientId: string;
  protocol: ProtocolLevel;
  /** The level to retry with after a refused CONNACK, or null (./mqtt-connection.ts fallbackProtocol). */
  fallback(tried: ProtocolLevel, err: { code: number }): ProtocolLevel | null;
  keepalive_s: number;
  username?: string;
  password?: string;
  /** For mqtts://: CA certificate(s) besides the system's; the broker's certificate is always verified. */
  ca?: string | string[] | Buffer | Buffer[];
  /** Topic filters subscribed (QoS 1) after every CONNACK. */
  filters(): readonly string[];
  /**
   * Unsubscribe the filters after every CONNACK instead: the session of a dead worker of a shared
   * group is resumed only to take what the broker still holds for it (ingest/ingest-service.ts).
   */
  drain?: boolean;
  connectTimeoutMs?: number;
  reconnectMinMs?: number;
  reconnectMaxMs?: number;
}

const DEFAULT_PORT: Record<string, number> = { 'mqtt:': 1883, 'mqtts:': 8883 };

/** MQTT 3.1.1 §3.2.2.3 CONNACK return codes (5.0 reason codes are shown in hex). */
const RETURN_CODES: Record<number, string> = {
  1: 'unacceptable protocol version',
  2: 'identifier rejected',
  3: 'server unavailable',
  4: 'bad user name or password',
  5: 'not authorized',
};

function refusal(protocol: ProtocolLevel, code: number): string {
  return protocol === 4 ? (RETURN_CODES[code] ?? `return code ${code}`) : `reason code 0x${code.toString(16)}`;
}

/**
 * One subscriber session: `start()` connects and keeps reconnecting until `close()`.
 * `ack(d)` releases a delivery's PUBACK; PUBACKs leave strictly in the order their PUBLISH
 * packets arrived (MQTT 3.1.1 §4.6, MQTT 5.0 §4.6), so one still held keeps the released ones
 * behind it waiting; all PUBACKs released in one tick leave as one socket write.
 */
export class MqttSession implements SubscriberSession {
  private socket: Duplex | null = null;
  /** Number of the connection being set up or open; 0 none. */
  private current = 0;
  private nextConnection = 0;
  private _protocol: ProtocolLevel;
  private open = false;
  private closing = false;
  private _paused = false;
  /** QoS 1 deliveries of the open connection, in arrival order; those before `head` are acknowledged. */
  private inflight: Delivery[] = [];
  private head = 0;
  /** PUBLISH packets parsed while paused: the rest of the socket chunk being read when the pause came. */
  private parked: IPublishPacket[] = [];
  private flushQueued = false;
  private backoffMs: number;
  private retryAt0 = false;
  private connectTimer: NodeJS.Timeout | null = null;
  private reconnectTimer: NodeJS.Timeout | null = null;
  private pingTimer: NodeJS.Timeout | null = null;
  /** Socket reads so far on this connection, and their count when the outstanding PINGREQ left (-1: none). */
  private reads = 0;
  private readsAtPing = -1;
  private subscribeId = 0;
  private closed: (() => void) | null = null;

  constructor(
    private opts: SessionOptions,
    private events: SessionEvents,
  ) {
    this._protocol = opts.protocol;
    this.backoffMs = opts.reconnectMinMs ?? 1_000;
  }

  get protocol(): ProtocolLevel {
    return this._protocol;
  }

  /** Intake stopped by pause(): the socket is not read. */
  get paused(): boolean {
    return this._paused;
  }

  get connected(): boolean {
    return this.open;
  }

  start(): void {
    this.dial();
  }

  private dial(): void {
    this.reconnectTimer = null;
    if (this.closing) return;
    const id = ++this.nextConnection;
    this.current = id;
    this.reads = 0;
    this.readsAtPing = -1;
    let socket: Duplex;
    try {
      socket = this.openSocket(() => this.write(id, this.connectPacket()));
    } catch (err) {
      this.events.error((err as Error).message, false);
      this.scheduleReconnect();
      return;
    }
    this.socket = socket;
    const parser = mqttPacket.parser({ protocolVersion: this._protocol });
    parser.on('packet', (p: Packet) => this.onPacket(id, p));
    parser.on('error', (err: Error) => this.drop(id, `malformed packet from the broker: ${err.message}`));
    socket.on('data', (chunk: Buffer) => {
      if (id !== this.current) return;
      this.reads++;
      parser.parse(chunk);
    });
    socket.on('error', (err: Error) => {
      if (id === this.current) this.events.error(err.message, false);
    });
    socket.on('close', () => this.onClose(id));
    this.connectTimer = setTimeout(() => this.drop(id, `no CONNACK within ${this.opts.connectTimeoutMs ?? 10_000} ms`), this.opts.connectTimeoutMs ?? 10_000);
  }

  private openSocket(onOpen: () => void): Duplex {
    const u = new URL(this.opts.url);
    if (u.protocol === 'ws:' || u.protocol === 'wss:') {
      // MQTT over WebSocket (MQTT 3.1.1 §6, MQTT 5.0 §6): binary frames, subprotocol "mqtt"; the
      // stream's backpressure pauses the WebSocket, so pause() works as on a TCP socket.
      const ws = new WebSocket(u, ['mqtt'], { rejectUnauthorized: true, ...(this.opts.ca ? { ca: this.opts.ca } : {}) });
      ws.once('open', onOpen);
      return createWebSocketStream(ws);
    }
    const port = DEFAULT_PORT[u.protocol];
    if (port === undefined) throw new Error(`MqttSession speaks mqtt://, mqtts://, ws:// and wss://, not ${u.protocol}//`);
    const host = u.hostname.replace(/^\[(.*)\]$/, '$1');
    const options = { host, port: u.port ? Number(u.port) : port };
    if (u.protocol === 'mqtt:') {
      const s = net.connect(options, onOpen);
      s.setNoDelay(true);
      return s;
    }
    const s = tls.connect({ ...options, ...(net.isIP(host) ? {} : { servername: host }), rejectUnauthorized: true, ...(this.opts.ca ? { ca: this.opts.ca } : {}) }, onOpen);
    s.setNoDelay(true);
    return s;
  }

  /**
   * CONNECT (MQTT 3.1.1 §3.1, MQTT 5.0 §3.1): Clean Session / Clean Start 0 with the fixed
   * Client Identifier, so the broker keeps the subscriptions and the unacknowledged QoS 1
   * messages while ingest is away and resends them after a reconnect (§4.4); on 5.0 Session
   * Expiry Interval 0xFFFFFFFF (never expires, §3.1.2.11.2) and Receive Maximum 65 535 (§3.1.2.11.3,
   * so thousands of held PUBACKs do not stall delivery; the writer's timed flush bounds the hold).
   */
  private connectPacket(): IConnectPacket {
    return {
      cmd: 'connect',
      protocolId: 'MQTT',
      protocolVersion: this._protocol,
      clean: false,
      clientId: this.opts.clientId,
      keepalive: this.opts.keepalive_s,
      ...(this.opts.username ? { username: this.opts.username } : {}),
      ...(this.opts.password ? { password: Buffer.from(this.opts.password) } : {}),
      ...(this._protocol === 5 ? { properties: { sessionExpiryInterval: 0xffffffff, receiveMaximum: 65_535 } } : {}),
    };
  }

  private onPacket(id: number, p: Packet): void {
    if (id !== this.current) return;
    switch (p.cmd) {
      case 'publish':
        if (this._paused) {
          this.parked.push(p);
          this.socket?.pause();
        } else this.onPublish(id, p);
        return;
      case 'connack':
        return this.onConnack(id, p);
      case 'suback':
        return this.onSuback(p);
      case 'unsuback':
        return;
      case 'pingresp':
        this.readsAtPing = -1;
        return;
      case 'disconnect':
        // MQTT 5.0 §3.14: the server closes the connection and says why.
        return this.drop(id, `broker disconnected: reason code 0x${(p.reasonCode ?? 0).toString(16)}${p.properties?.reasonString ? ` (${p.properties.reasonString})` : ''}`);
      default:
        // PUBACK/PUBREC/PUBCOMP answer QoS 1 and 2 publishes ingest never sends; PUBREL belongs to QoS 2.
        return this.drop(id, `unexpected ${p.cmd} from the broker`);
    }
  }

  private onConnack(id: number, p: IConnackPacket): void {
    if (this.connectTimer) clearTimeout(this.connectTimer);
    this.connectTimer = null;
    const code = (this._protocol === 5 ? p.reasonCode : p.returnCode) ?? 0;
    if (code !== 0) {
      const next = this.opts.fallback(this._protocol, { code });
      const fallback = next === null ? '' : `; retrying with MQTT ${next === 4 ? '3.1.1' : '5.0'}`;
      this.events.error(`broker refused the connection: ${refusal(this._protocol, code)}${fallback}`, next === null);
      if (next !== null) {
        this._protocol = next;
        this.retryAt0 = true;
      }
      return this.drop(id, null);
    }
    this.open = true;
    this.backoffMs = this.opts.reconnectMinMs ?? 1_000;
    // MQTT 5.0 §3.2.2.3.14: a Server Keep Alive in the CONNACK replaces the client's value.
    const keepalive_s = (this._protocol === 5 ? p.properties?.serverKeepAlive : undefined) ?? this.opts.keepalive_s;
    if (keepalive_s > 0) this.pingTimer = setInterval(() => this.keepAlive(id, keepalive_s), keepalive_s * 1_000);
    this.events.connected({ sessionPresent: p.sessionPresent, protocol: this._protocol });
    // Subscribing again on every connect is harmless (MQTT 5.0 §3.8.4: an identical filter
    // replaces the existing subscription; 3.1.1 §3.8.4 likewise).
    const filters = this.opts.filters();
    if (filters.length === 0) return;
    this.subscribeId = (this.subscribeId % 65_535) + 1;
    if (this.opts.drain) return this.write(id, { cmd: 'unsubscribe', messageId: this.subscribeId, unsubscriptions: [...filters] });
    this.write(id, { cmd: 'subscribe', messageId: this.subscribeId, subscriptions: filters.map((topic) => ({ topic, qos: 1 as const })) });
  }

  /** SUBACK (MQTT 3.1.1 §3.9.3: 0x80 failure; MQTT 5.0 §3.9.3: reason codes of 0x80 and above are failures). */
  private onSuback(p: ISubackPacket): void {
    const filters = this.opts.filters();
    const refused = (p.granted as number[]).flatMap((code, i) => (typeof code === 'number' && code >= 0x80 ? [`${filters[i] ?? `#${i}`} (0x${code.toString(16)})`] : []));
    if (refused.length) this.events.error(`subscription refused: ${refused.join(', ')}`, false);
  }

  private onPublish(id: number, p: IPublishPacket): void {
    const payload = typeof p.payload === 'string' ? Buffer.from(p.payload) : p.payload;
    if (p.qos === 0) return this.events.message(p.topic, payload, null);
    if (p.qos !== 1 || p.messageId === undefined) return this.drop(id, `QoS ${p.qos} PUBLISH on a QoS 1 subscription`);
    const d: Delivery = { messageId: p.messageId, topic: p.topic, payload, connection: id, done: false };
    this.inflight.push(d);
    this.events.message(p.topic, payload, d);
  }

  /**
   * Releases a delivery's PUBACK. It leaves at the end of this tick with every other PUBACK
   * then due, once all deliveries before it are released too; a delivery of a closed
   * connection is reported back as `unsent` (the broker will deliver it again).
   */
  ack(d: Delivery): void {
    if (d.done) return;
    d.done = true;
    if (d.connection !== this.current || !this.open) return this.events.unsent(d);
    if (this.flushQueued) return;
    this.flushQueued = true;
    process.nextTick(this.flushAcks);
  }

  /** Writes the PUBACKs due (MQTT 3.1.1 §3.4; MQTT 5.0 §3.4, reason Success omitted) as one buffer. */
  private flushAcks = (): void => {
    this.flushQueued = false;
    // A connection being dropped: what is still due stays in `inflight` and onClose reports it unsent.
    if (!this.open || !this.socket || this.socket.destroyed) return;
    const q = this.inflight;
    const from = this.head;
    let i = from;
    while (i < q.length && q[i]!.done) i++;
    if (i === from) return;
    const opts = { protocolVersion: this._protocol };
    const bufs: Buffer[] = new Array(i - from);
    for (let k = from; k < i; k++) bufs[k - from] = mqttPacket.generate({ cmd: 'puback', messageId: q[k]!.messageId }, opts);
    this.head = i;
    if (i === q.length) {
      this.inflight = [];
      this.head = 0;
    } else if (i > 4_096 && i * 2 > q.length) {
      this.inflight = q.slice(i);
      this.head = 0;
    }
    this.socket!.write(bufs.length === 1 ? bufs[0]! : Buffer.concat(bufs));
  };

  publish(topic: string, payload: Buffer): boolean {
    if (!this.open) return false;
    this.write(this.current, { cmd: 'publish', topic, payload, qos: 0, retain: false, dup: false });
    return true;
  }

  /** Stops reading the socket: TCP flow control leaves the rest with the broker. */
  pause(): void {
    if (this._paused) return;
    this._paused = true;
    this.socket?.pause();
  }

  /** Handles what was parsed while paused, in order, then reads on (unless that paused again). */
  resume(): void {
    if (!this._paused) return;
    this._paused = false;
    const id = this.current;
    let i = 0;
    while (i < this.parked.length && !this._paused && id === this.current) this.onPublish(id, this.parked[i++]!);
    this.parked = this.parked.slice(i);
    if (!this._paused) this.socket?.resume();
  }

  /**
   * Keep Alive (MQTT 3.1.1 §3.1.2.10, MQTT 5.0 §3.1.2.10): a PINGREQ every Keep Alive period;
   * if nothing at all was read from the broker during the period after the last one, the
   * connection is taken as dead and dropped ("within a reasonable amount of time"). While
   * intake is paused the socket is not read, so a missing PINGRESP proves nothing then.
   */
  private keepAlive(id: number, keepalive_s: number): void {
    if (this.readsAtPing >= 0 && this.reads === this.readsAtPing && !this._paused) {
      return this.drop(id, `no answer to PINGREQ within ${keepalive_s} s (Keep Alive)`);
    }
    this.readsAtPing = this.reads;
    this.write(id, { cmd: 'pingreq' });
  }

  private write(id: number, p: Packet): void {
    if (id !== this.current || !this.socket || this.socket.destroyed) return;
    this.socket.write(mqttPacket.generate(p, { protocolVersion: this._protocol }));
  }

  /** Closes connection `id` (the one error funnel: a bad packet or a dead broker never throws). */
  private drop(id: number, reason: string | null): void {
    if (id !== this.current) return;
    if (reason) this.events.error(reason, false);
    this.socket?.destroy();
  }

  private onClose(id: number): void {
    if (id !== this.current) return;
    this.current = 0;
    this.socket = null;
    const wasOpen = this.open;
    this.open = false;
    for (const t of [this.connectTimer, this.pingTimer]) if (t) clearTimeout(t);
    this.connectTimer = this.pingTimer = null;
    // Released but not yet written: the broker resends them (MQTT 3.1.1 §4.4, MQTT 5.0 §4.4).
    for (let k = this.head; k < this.inflight.length; k++) if (this.inflight[k]!.done) this.events.unsent(this.inflight[k]!);
    this.inflight = [];
    this.head = 0;
    this.parked = [];
    if (this.closing) {
      this.closed?.();
      return;
    }
    this.events.disconnected(wasOpen);
    this.scheduleReconnect();
  }

  /** Back-off: 1 s, doubling to 30 s, back to 1 s after a CONNACK; at once after a protocol fallback. */
  private scheduleReconnect(): void {
    if (this.closing) return;
    const delay = this.retryAt0 ? 0 : this.backoffMs;
    if (!this.retryAt0) this.backoffMs = Math.min(this.backoffMs * 2, this.opts.reconnectMaxMs ?? 30_000);
    this.retryAt0 = false;
    this.reconnectTimer = setTimeout(() => this.dial(), delay);
  }

  /** Writes the PUBACKs due, then DISCONNECT (MQTT 3.1.1 §3.14, MQTT 5.0 §3.14 reason Normal), and closes. */
  async close(endSession = false): Promise<void> {
    if (this.closing) return;
    this.closing = true;
    if (this.reconnectTimer) clearTimeout(this.reconnectTimer);
    this.reconnectTimer = null;
    const socket = this.socket;
    if (!socket) return;
    const done = new Promise<void>((r) => (this.closed = r));
    if (this.open) {
      this.flushAcks();
      this.write(this.current, this._protocol === 5 ? { cmd: 'disconnect', reasonCode: 0, ...(endSession ? { properties: { sessionExpiryInterval: 0 } } : {}) } : { cmd: 'disconnect' });
      socket.end();
    } else socket.destroy();
    const timer = setTimeout(() => socket.destroy(), 2_000);
    await done;
    clearTimeout(timer);
  }
}
