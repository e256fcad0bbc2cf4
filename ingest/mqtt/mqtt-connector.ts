import { createHash } from 'node:crypto';
import mqtt, { type IPublishPacket, type MqttClient } from 'mqtt';
import mqttPacket from 'mqtt-packet';
import type { Logger } from 'pino';
import type { MqttSourceOptions } from '../../shared/contracts/wiring.ts';
import { sourceStatusBase, type Connector, type ConnectorStatus, type ConnectionState, type SourceConfig } from '../connector.ts';
import { TagSet } from '../pipeline/tag-set.ts';
import type { TagConfig } from '../pipeline/types.ts';
import type { BatchWriter } from '../sink/batch-writer.ts';
import type { Discovery } from './discovery.ts';
import { MqttMessageHandler } from './message-handler.ts';
import { ncmdTopic, rebirthPayload } from './sparkplug.ts';
import { connectOptions, fallbackProtocol, firstProtocol, mqttOptionsOf, type ProtocolLevel } from './mqtt-connection.ts';

/**
 * How a held PUBACK leaves (see the class comment). `pipelined` is the product's;
 * `serial` holds mqtt.js's handleMessage callback until the commit, the stock way, and exists so
 * tests/bench/ingest.bench.ts (`--stock`) can measure what pipelining is worth.
 */
export type AckMode = 'pipelined' | 'serial';

interface HeldAck {
  messageId: number;
  generation: number;
  /** Kept to fingerprint the message if its connection closes before the PUBACK (rare; hashed only then). */
  topic: string;
  payload: Buffer;
  /** serial mode: mqtt.js's handleMessage callback, which sends the PUBACK. */
  release?: () => void;
}

function fingerprint(topic: string, payload: Buffer): string {
  return `${topic}\u0000${createHash('sha1').update(payload).digest('base64')}`;
}

/** How many committed-but-unacknowledged messages are remembered across a reconnect. */
const MAX_REMEMBERED = 100_000;

/**
 * What handleMessage passes to its callback for a message whose PUBACK ingest sends itself:
 * mqtt.js then sends no PUBACK and goes on to the next packet (mqtt.js 5.16
 * lib/handlers/publish.js, QoS 1: `if (err) return done(err)` before `_sendPacket(puback)`).
 */
const ACK_HELD = new Error('PUBACK held until the message is committed');

/**
 * One MQTT source: a persistent session and QoS 1 subscriptions, acknowledging each PUBLISH only
 * after its samples are committed to PostgreSQL or fsync'd to the spool.
 *
 * - Session: Clean Start = 0 with a fixed Client Identifier (MQTT 5.0 §3.1.2.4, §3.1.3.1) and,
 *   on 5.0, Session Expiry Interval = 0xFFFFFFFF (§3.1.2.11.2) so the broker keeps the
 *   subscriptions and queued QoS 1 messages while ingest is away; on reconnect it resends every
 *   PUBLISH that was not acknowledged (§4.4). Connect options and the 5.0 → 3.1.1 fallback come
 *   from ./mqtt-connection.ts, as for the API's connection test.
 * - Acknowledgement, through mqtt.js's public hook `handleMessage(packet, callback)`: mqtt.js
 *   handles incoming packets strictly one at a time and sends a QoS 1 PUBACK, then reads the next
 *   packet, only when that callback is called (lib/client.js `work`/`nextTickWork`). Holding the
 *   callback until the commit (`serial`) would therefore admit one message per batch commit.
 *   Instead (`pipelined`) the callback is called at once with ACK_HELD, so mqtt.js sends no
 *   PUBACK and moves on, and the PUBACK is written after the commit with mqtt-packet's public
 *   `generate` onto the client's `stream`; all PUBACKs one commit releases leave as one write.
 *   Acks are released in the order messages arrived, as required for QoS 1 (MQTT 3.1.1 §4.6).
 *   PUBACKs held for a connection that has since closed are dropped: the broker will resend
 *   those messages and they are recognised (committedUnacked) or absorbed by the primary key.
 * - Flow control: Receive Maximum (§3.1.2.11.3) is set to the maximum so a batch of held acks
 *   does not stall delivery; the writer's time-based flush bounds how long any ack is held.
 * - Backpressure (BatchWriter.onPressure): while the writer's backlog is high the handleMessage
 *   callback is held, so mqtt.js reads no further; TCP flow control keeps the excess in the broker.
 * - Reconnect: exponential back-off from 1 s to 30 s.
 */
export class MqttConnector implements Connector {
  readonly sourceId: number;
  private client: MqttClient | null = null;
  private tags = new TagSet();
  private handler: MqttMessageHandler;
  private opts: MqttSourceOptions;
  private generation = 0;
  private held = new Map<number, HeldAck>();
  /**
   * Messages whose rows were committed after their connection had closed, so their PUBACK could
   * not be sent: the broker will deliver them again (MQTT 3.1.1 §4.4, MQTT 5.0 §4.4; aedes does
   * not set the DUP flag on it). Such a redelivery is acknowledged without writing it twice —
   * samples would be absorbed by the primary key, dead letters would not.
   */
  private committedUnacked = new Map<number, string>();
  private protocol: ProtocolLevel;
  private state: ConnectionState = 'connecting';
  private lastError: string | null = null;
  private connectedAt: number | null = null;
  private lastMessageAt: number | null = null;
  private counters = { messages: 0, samples: 0, unmapped: 0, deadLetters: 0, suppressed: 0, reconnects: 0, outstanding: 0, redelivered: 0 };
  private closing = false;
  /** The message the 'message' event just took and whether ingest holds its PUBACK; read by handleMessage. */
  private current: { packet: IPublishPacket; held: boolean } | null = null;
  /** mqtt.js's callback for the message being handled while intake is paused (at most one). */
  private stalled: (() => void) | null = null;
  /** Messages whose PUBACK is written at the end of this tick (see flushAcks). */
  private ackQueue: HeldAck[] = [];
  private offPressure: () => void;

  constructor(
    private source: SourceConfig,
    tags: readonly TagConfig[],
    private writer: BatchWriter,
    /** `session`: the client identifier and filters of a worker in a shared subscription, or `drain` a dead worker's session (ingest/ingest-service.ts adoptOrphans). */
    private ctx: { clientIdPrefix: string; log: Logger; trace?: boolean; discovery?: Discovery; acks?: AckMode; session?: { clientId: string; filters: string[]; drain: boolean } },
  ) {
    this.sourceId = source.id;
    const { options, error } = mqttOptionsOf(source);
    this.opts = options;
    this.lastError = error;
    this.protocol = firstProtocol(this.opts);
    this.tags.update(tags);
    this.handler = new MqttMessageHandler(source.id, this.tags, ctx.discovery, { payload: this.opts.payload, requestRebirth: this.opts.requestRebirth });
    this.offPressure = writer.onPressure((high) => {
      if (high) return;
      const resume = this.stalled;
      this.stalled = null;
      resume?.();
    });
    this.connect();
  }

  get clientId(): string {
    return this.ctx.session?.clientId ?? this.opts.clientId ?? `${this.ctx.clientIdPrefix}-${this.source.id}`;
  }

  private get serial(): boolean {
    return this.ctx.acks === 'serial';
  }

  private connect(): void {
    const client = mqtt.connect(
      this.source.url,
      connectOptions(this.source, this.opts, this.protocol, {
        clientId: this.clientId,
        clean: false,
        reconnectPeriod: 1_000,
        connectTimeout: 10_000,
        resubscribe: false,
        queueQoSZero: false,
        // mqtt.js calls its `log` function several times per packet even when tracing is off;
        // a no-op one (a public option) saves that at 50 000 messages a second (DEBUG=mqttjs* turns it back on).
        ...(this.ctx.trace ? {} : { log: () => {} }),
        ...(this.protocol === 5 ? { properties: { sessionExpiryInterval: 0xffffffff, receiveMaximum: 65535 } } : {}),
      }),
    );
    this.client = client;
    // Called by mqtt.js right after the 'message' event of the same PUBLISH (lib/handlers/publish.js).
    client.handleMessage = (packet, callback) => {
      const cur = this.current;
      this.current = null;
      const held = cur !== null && cur.packet === packet && cur.held;
      // serial: the callback (mqtt.js's PUBACK) waits in the HeldAck until the commit.
      const go = held && this.serial ? () => {} : held ? () => callback(ACK_HELD) : () => callback();
      if (held && this.serial) this.held.get((packet as IPublishPacket).messageId!)!.release = () => callback();
      if (!this.writer.underPressure || this.client !== client) return go();
      // The callback of a connection that has closed is dropped with it (a new connection gets a new parser).
      this.stalled = () => {
        if (this.client === client && client.connected) go();
      };
    };
    client.on('connect', (connack) => {
      if (this.connectedAt !== null) this.counters.reconnects++;
      this.state = 'connected';
      this.lastError = null;
      this.connectedAt = Date.now();
      client.options.reconnectPeriod = 1_000;
      this.ctx.log.info({ source: this.source.id, sessionPresent: connack.sessionPresent, protocol: this.protocol }, 'mqtt connected');
      // Subscribing again on every connect is harmless (MQTT 5.0 §3.8.4: an identical filter replaces the subscription).
      if (this.ctx.session?.drain) return void client.unsubscribe(this.ctx.session.filters);
      client.subscribe(
        this.ctx.session?.filters ?? this.opts.topics,
        { qos: 1 },
        (err) => {
          if (err) this.lastError = `subscribe failed: ${err.message}`;
        },
      );
    });
    client.on('close', () => {
      // Held PUBACKs belong to the connection that just ended (see the class comment).
      this.generation++;
      this.held.clear();
      this.stalled = null;
      this.current = null;
      if (this.closing) return;
      this.state = 'reconnecting';
    });
    client.on('reconnect', () => {
      client.options.reconnectPeriod = Math.min((client.options.reconnectPeriod ?? 1_000) * 2, 30_000);
    });
    client.on('error', (err) => {
      this.lastError = err.message;
      const next = fallbackProtocol(this.opts, this.protocol, err);
      if (next !== null) {
        this.ctx.log.info({ source: this.source.id }, 'broker refused MQTT 5.0; using MQTT 3.1.1');
        this.protocol = next;
        client.end(true);
        this.connect();
        return;
      }
      this.state = 'error';
    });
    client.on('message', (topic, payload, packet) => {
      this.current = { packet, held: false };
      if (packet.qos === 1 && packet.messageId !== undefined) {
        // Only a packet identifier left over from a closed connection can be a redelivery of a
        // stored message; the digest is computed just for those.
        const remembered = this.committedUnacked.size ? this.committedUnacked.get(packet.messageId) : undefined;
        if (remembered !== undefined && remembered === fingerprint(topic, payload)) {
          // Already stored: mqtt.js sends its PUBACK now and nothing is written.
          this.committedUnacked.delete(packet.messageId);
          this.counters.redelivered++;
          return;
        }
        const h: HeldAck = { messageId: packet.messageId, generation: this.generation, topic, payload };
        this.held.set(packet.messageId, h);
        // Nothing to store (unmapped, deadband): mqtt.js's own PUBACK goes at once.
        if (this.process(topic, payload, h)) this.current.held = true;
        else this.held.delete(packet.messageId);
      } else {
        // QoS 0 has no acknowledgement (we subscribe with QoS 1, so the broker downgrades QoS 2 to 1).
        this.process(topic, payload, undefined);
      }
    });
  }

  /** Decodes and enqueues one message; false when there was nothing to write (so nothing to wait for). */
  private process(topic: string, payload: Buffer, held: HeldAck | undefined): boolean {
    const now = Date.now();
    this.lastMessageAt = now;
    this.counters.messages++;
    let r;
    try {
      r = this.handler.handle(topic, payload, now);
    } catch (err) {
      // One error funnel: a defect in decoding one message must not take the connection down.
      r = { samples: [], deadLetters: [], unmapped: 0, suppressed: 0 };
      this.ctx.log.error({ err, topic }, 'message handler failed');
    }
    this.counters.samples += r.samples.length;
    this.counters.unmapped += r.unmapped;
    this.counters.deadLetters += r.deadLetters.length;
    this.counters.suppressed += r.suppressed;
    if (r.rebirth) this.requestRebirth(r.rebirth.group, r.rebirth.node, now);
    if (r.samples.length === 0 && r.deadLetters.length === 0) return false;
    if (!held) {
      this.writer.enqueue(r.samples, r.deadLetters);
      return true;
    }
    this.counters.outstanding++;
    this.writer.enqueue(r.samples, r.deadLetters, () => {
      this.counters.outstanding--;
      this.release(held);
    });
    return true;
  }

  /**
   * The one message ingest ever publishes, and only on a source with `requestRebirth: true` (the
   * handler returns a rebirth only then, at most once per edge node per minute): the Sparkplug
   * rebirth command to an edge node whose aliases ingest does not know (Sparkplug 3.0 §4.2.1
   * NCMD, QoS 0 and retain false per tck-id-topics-ncmd-mqtt).
   */
  private requestRebirth(group: string, node: string, now: number): void {
    const client = this.client;
    if (!this.opts.requestRebirth || !client?.connected) return;
    const topic = ncmdTopic(group, node);
    client.publish(topic, rebirthPayload(now), { qos: 0, retain: false }, (err) => {
      if (err) this.ctx.log.warn({ source: this.source.id, topic, err: err.message }, 'rebirth request not sent');
    });
    this.handler.sparkplug?.rebirthSent();
    this.ctx.log.info({ source: this.source.id, topic }, 'Sparkplug rebirth requested');
  }

  /** Sends a held PUBACK if its connection is still the current one. */
  private release(h: HeldAck): void {
    if (h.generation !== this.generation) {
      this.remember(h);
      return;
    }
    if (this.held.get(h.messageId) !== h) return;
    this.held.delete(h.messageId);
    if (h.release) return h.release();
    if (this.ackQueue.length === 0) process.nextTick(this.flushAcks);
    this.ackQueue.push(h);
  }

  /** Committed, but its connection is gone before the PUBACK: remembered for the redelivery. */
  private remember(h: HeldAck): void {
    if (this.committedUnacked.size >= MAX_REMEMBERED) this.committedUnacked.delete(this.committedUnacked.keys().next().value!);
    this.committedUnacked.set(h.messageId, fingerprint(h.topic, h.payload));
  }

  /**
   * Writes the PUBACKs released in this tick, encoded by mqtt-packet for the session's protocol
   * level (MQTT 3.1.1 §3.4; MQTT 5.0 §3.4, reason code Success), in arrival order (§4.6), as one
   * buffer: a commit releases thousands at once. All of one tick's PUBACKs belong to one
   * connection; if it closed before this runs, they are remembered as release() remembers a late commit.
   */
  private flushAcks = (): void => {
    const held = this.ackQueue;
    this.ackQueue = [];
    const client = this.client;
    if (held[0]!.generation !== this.generation || !client?.connected || !client.stream) {
      for (const h of held) this.remember(h);
      return;
    }
    const opts = { protocolVersion: this.protocol };
    client.stream.write(Buffer.concat(held.map((h) => mqttPacket.generate({ cmd: 'puback', messageId: h.messageId }, opts))));
  };

  updateTags(tags: readonly TagConfig[]): void {
    if (this.tags.update(tags)) this.handler.rebuild();
  }

  status(now: number): ConnectorStatus {
    return {
      ...sourceStatusBase(this.source, { state: this.state, lastError: this.lastError, connectedAt: this.connectedAt, lastMessageAt: this.lastMessageAt, tags: this.tags }, now),
      messages: this.counters.messages,
      samples: this.counters.samples,
      unmapped: this.counters.unmapped,
      deadLetters: this.counters.deadLetters,
      suppressed: this.counters.suppressed,
      unacknowledged: this.counters.outstanding,
      reconnects: this.counters.reconnects,
      details: {
        clientId: this.clientId,
        protocolVersion: this.protocol === 5 ? '5.0' : '3.1.1',
        topics: this.opts.topics,
        discoveredTopics: this.handler.discovery.size,
        invalidFilters: this.handler.invalidFilters,
        /** Redeliveries of messages already stored, acknowledged without writing them again. */
        redelivered: this.counters.redelivered,
        /** Intake stopped at the writer's high-water mark: mqtt.js's callback is held, nothing more is read. */
        paused: this.stalled !== null,
        payload: this.opts.payload,
        ...(this.handler.sparkplug ? { sparkplug: this.handler.sparkplug.status() } : {}),
      },
    };
  }

  /** Connected, and every message received is committed and acknowledged. */
  get idle(): boolean {
    return this.state === 'connected' && this.held.size === 0 && this.counters.outstanding === 0;
  }

  /** `endSession`: Session Expiry Interval 0 on DISCONNECT, so the broker ends the session (MQTT 5.0 §3.14.2.2.2). */
  async close(endSession = false): Promise<void> {
    this.closing = true;
    this.state = 'disconnected';
    this.offPressure();
    this.stalled = null;
    const c = this.client;
    this.client = null;
    if (c) await c.endAsync(false, endSession && this.protocol === 5 ? { properties: { sessionExpiryInterval: 0 } } : {}).catch(() => {});
  }
}
