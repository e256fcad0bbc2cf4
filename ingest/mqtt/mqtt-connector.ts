import { createHash } from 'node:crypto';
import mqtt, { type IClientOptions, type MqttClient, type Packet } from 'mqtt';
import type { Logger } from 'pino';
import { z } from 'zod';
import { sourceStatusBase, type Connector, type ConnectorStatus, type ConnectionState, type SourceConfig } from '../connector.ts';
import { TagSet } from '../pipeline/tag-set.ts';
import type { TagConfig } from '../pipeline/types.ts';
import type { BatchWriter } from '../sink/batch-writer.ts';
import type { Discovery } from './discovery.ts';
import { MqttMessageHandler } from './message-handler.ts';

/** `sources.options` for an MQTT source, validated (house rule 3). */
export const mqttSourceOptions = z
  .object({
    /** Topic filters to subscribe to; `#` lets discovery list everything the broker carries. */
    topics: z.array(z.string().min(1)).min(1).default(['#']),
    /** 5 = MQTT 5.0, 4 = MQTT 3.1.1, 'auto' = try 5.0 and fall back to 3.1.1 if the broker refuses it. */
    protocolVersion: z.union([z.literal(4), z.literal(5), z.literal('auto')]).default('auto'),
    /** Overrides the generated client identifier (it must be stable for the session to persist). */
    clientId: z.string().min(1).max(128).optional(),
    keepalive_s: z.number().int().min(5).max(3600).default(30),
  })
  .strip();
export type MqttSourceOptions = z.infer<typeof mqttSourceOptions>;

/** MQTT 3.1.1 CONNACK return code 1 and MQTT 5.0 reason code 0x84: protocol version refused. */
const UNSUPPORTED_PROTOCOL = new Set([1, 0x84]);

interface HeldAck {
  messageId: number;
  generation: number;
  /** Kept to fingerprint the message if its connection closes before the PUBACK (rare; hashed only then). */
  topic: string;
  payload: Buffer;
}

function fingerprint(topic: string, payload: Buffer): string {
  return `${topic}\u0000${createHash('sha1').update(payload).digest('base64')}`;
}

/** How many committed-but-unacknowledged messages are remembered across a reconnect. */
const MAX_REMEMBERED = 100_000;

/** The mqtt.js 5.16 internal every outgoing packet goes through (private in its typings). */
interface PacketSender {
  _sendPacket(packet: Packet, cb?: (err?: Error) => void, cbStorePut?: () => void, noStore?: boolean): void;
}
type AckingClient = MqttClient;
function sender(c: MqttClient): PacketSender {
  return c as unknown as PacketSender;
}

/**
 * One MQTT source: a persistent session and QoS 1 subscriptions, acknowledging each PUBLISH only
 * after its samples are committed to PostgreSQL or fsync'd to the spool.
 *
 * - Session: Clean Start = 0 with a fixed Client Identifier (MQTT 5.0 §3.1.2.4, §3.1.3.1) and,
 *   on 5.0, Session Expiry Interval = 0xFFFFFFFF (§3.1.2.11.2) so the broker keeps the
 *   subscriptions and queued QoS 1 messages while ingest is away; on reconnect it resends every
 *   PUBLISH that was not acknowledged (§4.4).
 * - Acknowledgement: mqtt.js 5.16 handles incoming packets one at a time and only moves on once
 *   the handler of the current one completes, so delaying its `customHandleAcks` callback until
 *   a batch commits would admit one message per batch (and that option is ignored on MQTT
 *   3.1.1 anyway). Instead the message is taken from the 'message' event, which mqtt.js emits
 *   synchronously before it sends the PUBACK; the PUBACK is then intercepted and held, and
 *   written when the batch writer acknowledges the message. Acks are released in the order messages arrived, as
 *   required for QoS 1 (§4.6). PUBACKs held for a connection that has since closed are dropped:
 *   the broker will resend those messages and the primary key turns the copy into a no-op.
 * - Flow control: Receive Maximum (§3.1.2.11.3) is set to the maximum so a batch of held acks
 *   does not stall delivery; the writer's time-based flush bounds how long any ack is held.
 * - Reconnect: exponential back-off from 1 s to 30 s.
 */
export class MqttConnector implements Connector {
  readonly sourceId: number;
  private client: AckingClient | null = null;
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
  private protocol: 4 | 5;
  private state: ConnectionState = 'connecting';
  private lastError: string | null = null;
  private connectedAt: number | null = null;
  private lastMessageAt: number | null = null;
  private counters = { messages: 0, samples: 0, unmapped: 0, deadLetters: 0, suppressed: 0, reconnects: 0, outstanding: 0, redelivered: 0 };
  private closing = false;
  /** mqtt.js's callback for the message being handled while intake is paused (at most one). */
  private stalled: (() => void) | null = null;
  /** Messages whose PUBACK is written at the end of this tick (see flushAcks). */
  private ackQueue: HeldAck[] = [];
  private offPressure: () => void;

  constructor(
    private source: SourceConfig,
    tags: readonly TagConfig[],
    private writer: BatchWriter,
    private ctx: { clientIdPrefix: string; log: Logger; trace?: boolean; discovery?: Discovery },
  ) {
    this.sourceId = source.id;
    const parsed = mqttSourceOptions.safeParse(source.options ?? {});
    this.opts = parsed.success ? parsed.data : mqttSourceOptions.parse({});
    if (!parsed.success) this.lastError = `invalid source options, using defaults: ${parsed.error.issues.map((i) => i.message).join('; ')}`;
    this.protocol = this.opts.protocolVersion === 4 ? 4 : 5;
    this.tags.update(tags);
    this.handler = new MqttMessageHandler(source.id, this.tags, ctx.discovery);
    this.offPressure = writer.onPressure((high) => {
      if (high) return;
      const resume = this.stalled;
      this.stalled = null;
      resume?.();
    });
    this.connect();
  }

  get clientId(): string {
    return this.opts.clientId ?? `${this.ctx.clientIdPrefix}-${this.source.id}`;
  }

  private connect(): void {
    const options: IClientOptions = {
      clientId: this.clientId,
      clean: false,
      protocolVersion: this.protocol,
      keepalive: this.opts.keepalive_s,
      reconnectPeriod: 1_000,
      connectTimeout: 10_000,
      resubscribe: false,
      queueQoSZero: false,
      // mqtt.js calls its `debug` logger several times per packet even when tracing is off;
      // a no-op logger saves that at 50 000 messages a second (DEBUG=mqttjs* turns it back on).
      ...(this.ctx.trace ? {} : { log: () => {} }),
      ...(this.source.username ? { username: this.source.username } : {}),
      ...(this.source.secret ? { password: this.source.secret } : {}),
      ...(this.protocol === 5 ? { properties: { sessionExpiryInterval: 0xffffffff, receiveMaximum: 65535 } } : {}),
    };
    const client = mqtt.connect(this.source.url, options);
    this.client = client;
    const internals = sender(client);
    const send = internals._sendPacket.bind(client);
    internals._sendPacket = (packet, cb, cbStorePut, noStore) => {
      if (packet.cmd === 'puback' && packet.messageId !== undefined && this.held.has(packet.messageId)) {
        cb?.();
        return;
      }
      send(packet, cb, cbStorePut, noStore);
    };
    // Backpressure (BatchWriter.onPressure): mqtt.js handles incoming packets one at a time and
    // reads no further until handleMessage calls back, so holding the callback while the writer's
    // backlog is high stops reading the socket; TCP flow control then keeps the excess in the
    // broker. The callback of a connection that has closed is dropped with it (a new connection
    // gets a new parser).
    client.handleMessage = (_packet, callback) => {
      if (!this.writer.underPressure || this.client !== client) return callback();
      this.stalled = () => {
        if (this.client === client && client.connected) callback();
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
      client.subscribe(
        this.opts.topics.map((t) => t),
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
      if (this.closing) return;
      this.state = 'reconnecting';
    });
    client.on('reconnect', () => {
      client.options.reconnectPeriod = Math.min((client.options.reconnectPeriod ?? 1_000) * 2, 30_000);
    });
    client.on('error', (err) => {
      this.lastError = err.message;
      const code = (err as { code?: number }).code;
      if (this.opts.protocolVersion === 'auto' && this.protocol === 5 && typeof code === 'number' && UNSUPPORTED_PROTOCOL.has(code)) {
        this.ctx.log.info({ source: this.source.id }, 'broker refused MQTT 5.0; using MQTT 3.1.1');
        this.protocol = 4;
        client.end(true);
        this.connect();
        return;
      }
      this.state = 'error';
    });
    client.on('message', (_topic, payload, packet) => {
      if (packet.qos === 1 && packet.messageId !== undefined) {
        // Registered before mqtt.js sends the PUBACK, which the _sendPacket wrapper then holds.
        // Only a packet identifier left over from a closed connection can be a redelivery of a
        // stored message; the digest is computed just for those.
        const remembered = this.committedUnacked.size ? this.committedUnacked.get(packet.messageId) : undefined;
        if (remembered !== undefined && remembered === fingerprint(packet.topic, payload)) {
          // Already stored: let mqtt.js send its PUBACK now and write nothing.
          this.committedUnacked.delete(packet.messageId);
          this.counters.redelivered++;
          return;
        }
        const h: HeldAck = { messageId: packet.messageId, generation: this.generation, topic: packet.topic, payload };
        this.held.set(packet.messageId, h);
        // Nothing to store (unmapped, deadband): mqtt.js's own PUBACK, which follows this event,
        // is let through — releasing it here as well would acknowledge the identifier twice, and
        // a second PUBACK could acknowledge the broker's next message under the reused identifier.
        if (!this.process(packet.topic, payload, h)) this.held.delete(packet.messageId);
      } else {
        // QoS 0 has no acknowledgement (we subscribe with QoS 1, so the broker downgrades QoS 2 to 1).
        this.process(packet.topic, payload, undefined);
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

  /** Sends a held PUBACK if its connection is still the current one. */
  private release(h: HeldAck): void {
    if (h.generation !== this.generation) {
      this.remember(h);
      return;
    }
    if (this.held.get(h.messageId) !== h) return;
    this.held.delete(h.messageId);
    if (this.ackQueue.length === 0) process.nextTick(this.flushAcks);
    this.ackQueue.push(h);
  }

  /** Committed, but its connection is gone before the PUBACK: remembered for the redelivery. */
  private remember(h: HeldAck): void {
    if (this.committedUnacked.size >= MAX_REMEMBERED) this.committedUnacked.delete(this.committedUnacked.keys().next().value!);
    this.committedUnacked.set(h.messageId, fingerprint(h.topic, h.payload));
  }

  /**
   * Writes the PUBACKs released in this tick as one buffer. A commit releases thousands at once;
   * one write of 4 bytes each instead of an encoder call, a cork and a socket write apiece —
   * about a tenth of ingest's CPU per message in tests/bench/ingest.bench.ts. The encoding is
   * the same for both protocol levels: MQTT 3.1.1 §3.4 (type 4, remaining length 2, packet
   * identifier) and MQTT 5.0 §3.4.2.1, where a remaining length of 2 means reason code 0x00
   * (Success) with no properties. The packets go in arrival order (§4.6). All of one tick's
   * PUBACKs belong to one connection; if it closed before this runs, they are remembered as
   * release() remembers a late commit.
   */
  private flushAcks = (): void => {
    const held = this.ackQueue;
    this.ackQueue = [];
    const client = this.client;
    if (held[0]!.generation !== this.generation || !client?.connected || !client.stream) {
      for (const h of held) this.remember(h);
      return;
    }
    const buf = Buffer.allocUnsafe(held.length * 4);
    for (let i = 0, o = 0; i < held.length; i++, o += 4) {
      buf[o] = 0x40;
      buf[o + 1] = 0x02;
      buf.writeUInt16BE(held[i]!.messageId, o + 2);
    }
    client.stream.write(buf);
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
      },
    };
  }

  async close(): Promise<void> {
    this.closing = true;
    this.state = 'disconnected';
    this.offPressure();
    this.stalled = null;
    const c = this.client;
    this.client = null;
    if (c) await c.endAsync(false).catch(() => {});
  }
}
