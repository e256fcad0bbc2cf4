/**
 * A subscriber session on mqtt.js, used the documented way: the PUBACK of a QoS 1 message is
 * held by holding mqtt.js's `handleMessage(packet, callback)` callback until `ack()` (mqtt.js
 * README, "Client#handleMessage": "Handle messages with backpressure support, one at a time …
 * always call callback"). mqtt.js handles packets one at a time and reads the next only after
 * that callback, so this admits one message per batch commit. It is the stock reference
 * `npm run bench:ingest -- --stock` measures ./mqtt-session.ts against.
 */
import mqtt, { type IClientOptions, type IPublishPacket, type MqttClient } from 'mqtt';
import type { ProtocolLevel } from './mqtt-connection.ts';
import type { Delivery, SessionEvents, SessionOptions, SubscriberSession } from './mqtt-session.ts';

interface HeldDelivery extends Delivery {
  packet: IPublishPacket;
  /** mqtt.js's callback, which sends the PUBACK and reads on; set once handleMessage was called. */
  release: (() => void) | null;
}

export interface MqttJsSessionOptions extends Pick<SessionOptions, 'url' | 'protocol' | 'fallback' | 'filters' | 'drain'> {
  /** mqtt.js options for a protocol level (./mqtt-connection.ts connectOptions, with the session's client id and Clean Start 0). */
  clientOptions(protocol: ProtocolLevel): IClientOptions;
}

export class MqttJsSession implements SubscriberSession {
  private client: MqttClient | null = null;
  private _protocol: ProtocolLevel;
  private _paused = false;
  /** Number of the open connection (0: none) and of the last one. */
  private live = 0;
  private count = 0;
  /** The delivery the 'message' event just announced; handleMessage for the same packet follows it. */
  private current: HeldDelivery | null = null;
  /** mqtt.js's callback waiting while intake is paused (at most one). */
  private stalled: (() => void) | null = null;

  constructor(
    private opts: MqttJsSessionOptions,
    private events: SessionEvents,
  ) {
    this._protocol = opts.protocol;
  }

  get protocol(): ProtocolLevel {
    return this._protocol;
  }

  get paused(): boolean {
    return this._paused;
  }

  get connected(): boolean {
    return this.live !== 0;
  }

  start(): void {
    const client = mqtt.connect(this.opts.url, { ...this.opts.clientOptions(this._protocol), reconnectPeriod: 1_000, connectTimeout: 10_000, resubscribe: false, queueQoSZero: false });
    this.client = client;
    // mqtt.js calls this right after the 'message' event of the same PUBLISH.
    client.handleMessage = (packet, callback) => {
      const d = this.current;
      this.current = null;
      if (d && d.packet === packet && !d.done) {
        d.release = () => callback();
        return;
      }
      this.proceed(client, () => callback());
    };
    client.on('connect', (connack) => {
      this.live = ++this.count;
      client.options.reconnectPeriod = 1_000;
      this.events.connected({ sessionPresent: connack.sessionPresent, protocol: this._protocol });
      if (this.opts.drain) return void client.unsubscribe([...this.opts.filters()]);
      client.subscribe([...this.opts.filters()], { qos: 1 }, (err, granted) => {
        if (err) return this.events.error(`subscribe failed: ${err.message}`, false);
        // MQTT 3.1.1 §3.9.3 / 5.0 §3.9.3: a granted QoS of 0x80 or above is a refusal.
        const refused = (granted ?? []).filter((g) => g.qos >= 0x80).map((g) => `${g.topic} (0x${g.qos.toString(16)})`);
        if (refused.length) this.events.error(`subscription refused: ${refused.join(', ')}`, false);
      });
    });
    client.on('close', () => {
      if (this.client !== client) return;
      const wasOpen = this.live !== 0;
      this.live = 0;
      this.stalled = null;
      this.current = null;
      this.events.disconnected(wasOpen);
    });
    client.on('reconnect', () => {
      client.options.reconnectPeriod = Math.min((client.options.reconnectPeriod ?? 1_000) * 2, 30_000);
    });
    client.on('error', (err) => {
      if (this.client !== client) return;
      const code = (err as { code?: unknown }).code;
      const next = typeof code === 'number' ? this.opts.fallback(this._protocol, { code }) : null;
      if (next === null) return this.events.error(err.message, typeof code === 'number');
      this.events.error(`broker refused the connection: ${err.message}; retrying with MQTT 3.1.1`, false);
      this._protocol = next;
      this.client = null;
      client.end(true);
      this.start();
    });
    client.on('message', (topic, payload, packet) => {
      if (packet.qos === 0 || packet.messageId === undefined) return this.events.message(topic, payload, null);
      const d: HeldDelivery = { messageId: packet.messageId, topic, payload, connection: this.live, done: false, packet, release: null };
      this.current = d;
      this.events.message(topic, payload, d);
    });
  }

  ack(d: Delivery): void {
    if (d.done) return;
    d.done = true;
    if (d.connection !== this.live || !this.client) return this.events.unsent(d);
    const h = d as HeldDelivery;
    const release = h.release;
    h.release = null;
    // Not yet handed to handleMessage (released inside the 'message' event): it proceeds there.
    if (release) this.proceed(this.client, release);
  }

  private proceed(client: MqttClient, go: () => void): void {
    if (!this._paused) return go();
    // The callback of a connection that has closed is dropped with it.
    this.stalled = () => {
      if (this.client === client && client.connected) go();
    };
  }

  publish(topic: string, payload: Buffer): boolean {
    const client = this.client;
    if (!client?.connected) return false;
    client.publish(topic, payload, { qos: 0, retain: false }, (err) => {
      if (err) this.events.error(`publish to ${topic} failed: ${err.message}`, false);
    });
    return true;
  }

  pause(): void {
    this._paused = true;
  }

  resume(): void {
    this._paused = false;
    const go = this.stalled;
    this.stalled = null;
    go?.();
  }

  async close(endSession = false): Promise<void> {
    this.stalled = null;
    const c = this.client;
    this.client = null;
    this.live = 0;
    if (c) await c.endAsync(false, endSession && this._protocol === 5 ? { properties: { sessionExpiryInterval: 0 } } : {}).catch(() => {});
  }
}
