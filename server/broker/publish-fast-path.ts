/**
 * A fast path in front of mqtt-packet's stream parser for the two packets that make up almost
 * all MQTT traffic at volume, PUBLISH and PUBACK of MQTT 3.1 / 3.1.1; every other packet, every
 * packet of an MQTT 5 connection and anything malformed goes to mqtt-packet's own parser, which
 * stays the one judge of what is an error and what the error says.
 *
 * Why: mqtt-packet keeps incoming bytes in a BufferList and walks each packet through four state
 * methods, consuming the list piece by piece (a new Buffer view per piece, five or more per
 * packet). For a QoS 1 message the embedded broker parses a PUBLISH and a PUBACK, and ingest a
 * PUBLISH; in tests/bench/ingest.bench.ts that parsing was about a fifth of the broker's CPU.
 * Here a complete packet is read in place from the socket's chunk: one Packet object, one topic
 * string and one payload view.
 *
 * What a listener receives is what mqtt-packet would emit, field for field (same Packet class,
 * same property order): for PUBLISH cmd, retain, qos, dup, length (remaining length), topic,
 * payload (a view of the received bytes) and, for QoS 1 and 2, messageId; for PUBACK cmd,
 * retain, qos, dup, length 2, topic null, payload null, messageId. The fast path takes a packet
 * only when it is complete and well formed (MQTT 3.1.1 §2.2, §3.3, §3.4): PUBLISH with QoS 0–2,
 * a topic length that fits the packet and room for the packet identifier; PUBACK with flags 0
 * and remaining length 2. tests/unit/server/publish-fast-path.test.ts feeds the same byte
 * streams, cut at every kind of boundary, to this and to mqtt-packet alone and compares packets
 * and errors. One deliberate difference: a QoS 1 or 2 PUBLISH too short for its packet
 * identifier is an error here (see publish()), where mqtt-packet emits it with an identifier
 * that depends on how the bytes arrived.
 *
 * Streaming: a packet mqtt-packet must parse is handed to it as its bytes arrive (so a bad
 * header is reported as soon as its length is known, as mqtt-packet alone would after reading
 * it); the fast path resumes at the next packet boundary. After mqtt-packet reports an error the
 * rest of that chunk is dropped, and the next parse() starts afresh, as mqtt-packet does.
 */
import { EventEmitter } from 'node:events';
import { createRequire } from 'node:module';

const require = createRequire(import.meta.url);

/** mqtt-packet's Parser as this module uses it. */
export interface PacketParser extends EventEmitter {
  parse(buf: Buffer): number;
  settings: { protocolVersion?: number } | null | undefined;
  error: Error | null;
}

interface MqttPacketModule {
  parser(opts?: object): PacketParser;
}

type PacketObject = Record<string, unknown>;
// mqtt-packet's own Packet class, so fast-path packets have the same shape as its own.
const Packet = require('mqtt-packet/packet.js') as new () => PacketObject;

const PUBLISH = 3;
const PUBACK_HEADER = 0x40;

export class FastPathParser extends EventEmitter {
  /**
   * Chunks of an incomplete packet the fast path waits for the rest of, joined once the packet is
   * complete (joining on every chunk would copy a large payload over and over).
   */
  private rest: Buffer[] = [];
  private restBytes = 0;
  /** Bytes the packet in `rest` needs in all; 0 while its remaining length is not known yet. */
  private restNeeds = 0;
  /** Bytes still owed to the inner parser for the packet it is parsing. */
  private owed = 0;
  /** Set by aedes (lib/client.js), which reads them with `this` bound to the emitter. */
  client?: unknown;
  _queue?: unknown[] | null;

  constructor(readonly inner: PacketParser) {
    super();
    inner.on('packet', (p: PacketObject) => this.emit('packet', p));
    inner.on('error', (err: Error) => this.emit('error', err));
  }

  get settings(): PacketParser['settings'] {
    return this.inner.settings;
  }

  /** Parses what the stream delivered; returns the bytes kept for the next call. */
  parse(chunk: Buffer): number {
    let buf = chunk;
    if (this.owed > 0) {
      // The packet the inner parser is in the middle of comes first.
      const n = Math.min(this.owed, buf.length);
      this.owed -= n;
      if (!this.feedInner(buf.subarray(0, n))) return 0;
      if (n === buf.length) return 0;
      buf = buf.subarray(n);
    }
    if (this.rest.length) {
      this.rest.push(buf);
      this.restBytes += buf.length;
      if (this.restBytes < this.restNeeds) return this.restBytes;
      buf = Buffer.concat(this.rest, this.restBytes);
      this.dropRest();
    }
    let i = 0;
    while (i < buf.length) {
      const first = buf[i]!;
      // Read per packet: a CONNECT parsed earlier in this chunk sets the protocol level.
      const v5 = this.inner.settings?.protocolVersion === 5;
      // Remaining length (§2.2.3): one to four bytes, seven bits each, least significant first.
      let len = 0;
      let mul = 1;
      let j = i + 1;
      let complete = false;
      for (let k = 0; k < 4 && j < buf.length; k++) {
        const d = buf[j++]!;
        len += (d & 0x7f) * mul;
        mul *= 128;
        if ((d & 0x80) === 0) {
          complete = true;
          break;
        }
      }
      if (!complete) {
        // A fifth length byte is malformed: mqtt-packet says so.
        if (j - i - 1 >= 4) return this.handOver(buf.subarray(i), 0);
        return this.wait(buf.subarray(i), 0);
      }
      const end = j + len;
      const type = first >> 4;
      const fast = !v5 && ((type === PUBLISH && (first & 0x06) !== 0x06) || (first === PUBACK_HEADER && len === 2));
      if (!fast) {
        if (end > buf.length) return this.handOver(buf.subarray(i), end - buf.length);
        if (!this.feedInner(buf.subarray(i, end))) return 0;
        i = end;
        continue;
      }
      if (end > buf.length) return this.wait(buf.subarray(i), end - i);
      const packet = first === PUBACK_HEADER ? this.puback(buf, j) : this.publish(buf, first, j, len, end);
      if (packet === null) {
        // Not well formed: mqtt-packet reports it.
        if (!this.feedInner(buf.subarray(i, end))) return 0;
      } else if (packet instanceof Error) {
        this.emit('error', packet);
        return 0;
      } else this.emit('packet', packet);
      i = end;
    }
    return 0;
  }

  private puback(buf: Buffer, j: number): PacketObject {
    const p = new Packet();
    p.cmd = 'puback';
    p.length = 2;
    p.messageId = (buf[j]! << 8) | buf[j + 1]!;
    return p;
  }

  /**
   * null: mqtt-packet is to parse it. An Error for the one case where mqtt-packet does not report
   * one: a QoS 1 or 2 PUBLISH without room for its packet identifier (§3.3.2.2) — mqtt-packet then
   * reads the identifier from the next packet's bytes, or gives -1 when none have arrived yet,
   * and emits the packet; here it is the error mqtt-packet's own check intends, with its words.
   */
  private publish(buf: Buffer, first: number, j: number, len: number, end: number): PacketObject | Error | null {
    if (len < 2) return null;
    const topicEnd = j + 2 + ((buf[j]! << 8) | buf[j + 1]!);
    if (topicEnd > end) return null;
    const qos = (first >> 1) & 3;
    const payloadStart = qos > 0 ? topicEnd + 2 : topicEnd;
    if (payloadStart > end) return new Error('Cannot parse messageId');
    const p = new Packet();
    p.cmd = 'publish';
    p.retain = (first & 0x01) !== 0;
    p.qos = qos;
    p.dup = (first & 0x08) !== 0;
    p.length = len;
    p.topic = buf.toString('utf8', j + 2, topicEnd);
    if (qos > 0) p.messageId = (buf[topicEnd]! << 8) | buf[topicEnd + 1]!;
    p.payload = buf.subarray(payloadStart, end);
    return p;
  }

  /** Keeps the start of an incomplete packet that needs `needs` bytes in all (0: not known yet). */
  private wait(start: Buffer, needs: number): number {
    this.rest = [start];
    this.restBytes = start.length;
    this.restNeeds = needs;
    return start.length;
  }

  private dropRest(): void {
    this.rest = [];
    this.restBytes = 0;
    this.restNeeds = 0;
  }

  /** The rest of this chunk belongs to a packet the inner parser parses; `owed` more bytes follow. */
  private handOver(bytes: Buffer, owed: number): number {
    this.owed = owed;
    this.feedInner(bytes);
    return 0;
  }

  /** False when the inner parser reported an error (the caller drops the rest of the chunk). */
  private feedInner(bytes: Buffer): boolean {
    this.inner.parse(bytes);
    if (!this.inner.error) return true;
    this.owed = 0;
    this.dropRest();
    return false;
  }
}

/**
 * Puts the fast path in front of an aedes client's parser (aedes 1.2 lib/client.js: the parser
 * is `client._parser`, its 'packet' and 'error' listeners were attached in the constructor, and
 * `client` and `_queue` are read from it). Call right after `broker.handle(conn)`, before any
 * data is read.
 */
export function fastPathForAedesClient(client: { _parser: PacketParser & { client?: unknown; _queue?: unknown[] | null } }): void {
  const inner = client._parser;
  const listeners = { packet: inner.listeners('packet'), error: inner.listeners('error') };
  inner.removeAllListeners('packet');
  inner.removeAllListeners('error');
  const fast = new FastPathParser(inner);
  for (const l of listeners.packet) fast.on('packet', l as (...a: unknown[]) => void);
  for (const l of listeners.error) fast.on('error', l as (...a: unknown[]) => void);
  fast.client = inner.client;
  fast._queue = inner._queue;
  client._parser = fast as unknown as PacketParser;
}

let installed = false;

/**
 * Makes every mqtt-packet parser created from now on in this process a fast-path one (mqtt.js
 * creates one per connection through `mqttPacket.parser(options)`). For the ingest process.
 */
export function useFastPathParsers(): void {
  if (installed) return;
  installed = true;
  const mod = require('mqtt-packet') as MqttPacketModule;
  const make = mod.parser;
  mod.parser = (opts?: object) => new FastPathParser(make(opts)) as unknown as PacketParser;
}
