import { createHash } from 'node:crypto';
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
import { MqttSession, type Delivery, type SessionEvents, type SubscriberSession } from './mqtt-session.ts';
import { MqttJsSession } from './mqttjs-session.ts';

/**
 * Which session carries a source. `pipelined` (the product's) is
 * ./mqtt-session.ts; `serial` is mqtt.js with its handleMessage callback held until the commit
 * (./mqttjs-session.ts), the stock way, kept so tests/bench/ingest.bench.ts (`--stock`) can
 * measure what the own session is worth.
 */
export type AckMode = 'pipelined' | 'serial';

function fingerprint(topic: string, payload: Buffer): string {
  return `${topic}\u0000${createHash('sha1').update(payload).digest('base64')}`;
}

/** How many committed-but-unacknowledged messages are remembered across a reconnect. */
const MAX_REMEMBERED = 100_000;

/**
 * One MQTT source: a persistent session and QoS 1 subscriptions, acknowledging each PUBLISH only
 * after its samples are committed to PostgreSQL or fsync'd to the spool.
 *
 * - Session: Clean Start = 0 with a fixed Client Identifier (MQTT 5.0 §3.1.2.4, §3.1.3.1) and,
 *   on 5.0, Session Expiry Interval = 0xFFFFFFFF (§3.1.2.11.2) so the broker keeps the
 *   subscriptions and queued QoS 1 messages while ingest is away; on reconnect it resends every
 *   PUBLISH that was not acknowledged (§4.4). Connect options and the 5.0 → 3.1.1 fallback come
 *   from ./mqtt-connection.ts, as for the API's connection test.
 * - Acknowledgement: sources run on ./mqtt-session.ts, a subscriber session over its own socket
 *   (TCP, TLS or WebSocket) that speaks MQTT through mqtt-packet's public parser and generator:
 *   it reads on while PUBACKs are held, and writes those a commit releases in arrival order
 *   (MQTT 3.1.1 §4.6) as one write.
 *   PUBACKs held for a connection that has since closed are dropped: the broker will resend
 *   those messages and they are recognised (committedUnacked) or absorbed by the primary key.
 * - Flow control: Receive Maximum (§3.1.2.11.3) is set to the maximum so a batch of held acks
 *   does not stall delivery; the writer's time-based flush bounds how long any ack is held.
 * - Backpressure (BatchWriter.onPressure): while the writer's backlog is high the session stops
 *   reading its socket; TCP flow control keeps the excess in the broker.
 * - Reconnect: exponential back-off from 1 s to 30 s.
 */
export class MqttConnector implements Connector {
  readonly sourceId: number;
  private session: SubscriberSession;
  private tags = new TagSet();
  private handler: MqttMessageHandler;
  private opts: MqttSourceOptions;
  /**
   * Messages whose rows were committed after their connection had closed, so their PUBACK could
   * not be sent: the broker will deliver them again (MQTT 3.1.1 §4.4, MQTT 5.0 §4.4; aedes does
   * not set the DUP flag on it). Such a redelivery on the same process and packet identifier is
   * acknowledged without writing it again. Any other (a fresh process after a kill, a broker
   * that restored its queue under new packet identifiers) is written again: its samples are
   * absorbed by the primary key, its dead letters by their delivery key (counted as seen again).
   */
  private committedUnacked = new Map<number, string>();
  private state: ConnectionState = 'connecting';
  private lastError: string | null = null;
  private connectedAt: number | null = null;
  private lastMessageAt: number | null = null;
  private counters = { messages: 0, samples: 0, unmapped: 0, deadLetters: 0, suppressed: 0, reconnects: 0, outstanding: 0, redelivered: 0 };
  private closing = false;
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
    this.tags.update(tags);
    this.handler = new MqttMessageHandler(source.id, this.tags, ctx.discovery, { payload: this.opts.payload, requestRebirth: this.opts.requestRebirth });
    this.session = this.createSession();
    this.offPressure = writer.onPressure((high) => {
      if (!high) this.session.resume();
    });
    this.session.start();
  }

  get clientId(): string {
    return this.ctx.session?.clientId ?? this.opts.clientId ?? `${this.ctx.clientIdPrefix}-${this.source.id}`;
  }

  /**
   * The topic filters this source subscribes to, in one place (a shared subscription would
   * prefix them here).
   */
  private subscriptionFilters(): readonly string[] {
    return this.ctx.session?.filters ?? this.opts.topics;
  }

  private createSession(): SubscriberSession {
    const o = this.opts;
    const common = {
      url: this.source.url,
      protocol: firstProtocol(o),
      fallback: (tried: ProtocolLevel, err: { code: number }) => fallbackProtocol(o, tried, err),
      filters: () => this.subscriptionFilters(),
      drain: this.ctx.session?.drain ?? false,
    };
    if (this.ctx.acks === 'serial') {
      return new MqttJsSession(
        {
          ...common,
          clientOptions: (protocol) =>
            connectOptions(this.source, o, protocol, {
              clientId: this.clientId,
              clean: false,
              // mqtt.js calls its `log` function several times per packet even when tracing is off;
              // a no-op one (a public option) saves that (DEBUG=mqttjs* turns it back on).
              ...(this.ctx.trace ? {} : { log: () => {} }),
              ...(protocol === 5 ? { properties: { sessionExpiryInterval: 0xffffffff, receiveMaximum: 65535 } } : {}),
            }),
        },
        this.events,
      );
    }
    // The same credentials, Keep Alive and CA as the connection test (connectOptions).
    const c = connectOptions(this.source, o, common.protocol, {});
    return new MqttSession(
      {
        ...common,
        clientId: this.clientId,
        keepalive_s: c.keepalive ?? o.keepalive_s,
        ...(c.username ? { username: c.username } : {}),
        ...(typeof c.password === 'string' ? { password: c.password } : {}),
        ...(c.ca ? { ca: c.ca as string } : {}),
      },
      this.events,
    );
  }

  private events: SessionEvents = {
    message: (topic, payload, d) => this.onMessage(topic, payload, d),
    connected: ({ sessionPresent, protocol }) => {
      if (this.connectedAt !== null) this.counters.reconnects++;
      this.state = 'connected';
      this.lastError = null;
      this.connectedAt = Date.now();
      this.ctx.log.info({ source: this.source.id, sessionPresent, protocol }, 'mqtt connected');
    },
    disconnected: () => {
      if (!this.closing && this.state !== 'error') this.state = 'reconnecting';
    },
    error: (message, refused) => {
      this.lastError = message;
      if (refused) this.state = 'error';
      this.ctx.log.info({ source: this.source.id, err: message }, 'mqtt connection problem');
    },
    // Committed, but its connection is gone before the PUBACK: remembered for the redelivery.
    unsent: (d) => {
      if (this.committedUnacked.size >= MAX_REMEMBERED) this.committedUnacked.delete(this.committedUnacked.keys().next().value!);
      this.committedUnacked.set(d.messageId, fingerprint(d.topic, d.payload));
    },
  };

  private onMessage(topic: string, payload: Buffer, d: Delivery | null): void {
    if (d === null) {
      // QoS 0 has no acknowledgement (we subscribe with QoS 1, so the broker downgrades QoS 2 to 1).
      this.process(topic, payload, null);
    } else {
      // Only a packet identifier left over from a closed connection can be a redelivery of a
      // stored message; the digest is computed just for those.
      const remembered = this.committedUnacked.size ? this.committedUnacked.get(d.messageId) : undefined;
      if (remembered !== undefined && remembered === fingerprint(topic, payload)) {
        // Already stored: acknowledged without writing it again.
        this.committedUnacked.delete(d.messageId);
        this.counters.redelivered++;
        this.session.ack(d);
      } else if (!this.process(topic, payload, d)) {
        // Nothing to store (unmapped, deadband): its PUBACK is due at once (after those before it).
        this.session.ack(d);
      }
    }
    if (this.writer.underPressure) this.session.pause();
  }

  /** Decodes and enqueues one message; false when there was nothing to write (so nothing to wait for). */
  private process(topic: string, payload: Buffer, held: Delivery | null): boolean {
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
      this.session.ack(held);
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
    if (!this.opts.requestRebirth) return;
    const topic = ncmdTopic(group, node);
    if (!this.session.publish(topic, rebirthPayload(now))) return;
    this.handler.sparkplug?.rebirthSent();
    this.ctx.log.info({ source: this.source.id, topic }, 'Sparkplug rebirth requested');
  }

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
        protocolVersion: this.session.protocol === 5 ? '5.0' : '3.1.1',
        topics: this.opts.topics,
        discoveredTopics: this.handler.discovery.size,
        invalidFilters: this.handler.invalidFilters,
        /** Redeliveries of messages already stored, acknowledged without writing them again. */
        redelivered: this.counters.redelivered,
        /** `pipelined`: ingest's own session; `serial`: mqtt.js, one message per commit (the benchmark's stock reference). */
        acks: this.session instanceof MqttSession ? 'pipelined' : 'serial',
        /** Intake stopped at the writer's high-water mark: the broker's socket is not read. */
        paused: this.session.paused,
        payload: this.opts.payload,
        ...(this.handler.sparkplug ? { sparkplug: this.handler.sparkplug.status() } : {}),
      },
    };
  }

  /** Connected, and every message received is committed and acknowledged. */
  get idle(): boolean {
    return this.state === 'connected' && this.counters.outstanding === 0;
  }

  /** `endSession`: Session Expiry Interval 0 on DISCONNECT, so the broker ends the session (MQTT 5.0 §3.14.2.2.2). */
  async close(endSession = false): Promise<void> {
    this.closing = true;
    this.state = 'disconnected';
    this.offPressure();
    await this.session.close(endSession);
  }
}
