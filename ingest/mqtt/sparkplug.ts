/**
 * Sparkplug B (Eclipse Sparkplug 3.0) for an MQTT source: topic parsing, payload decoding with the
 * `sparkplug-payload` package (Eclipse Tahu's protobuf codec), and the per-edge-node session state a
 * host needs to read NDATA/DDATA — the metric names, aliases, datatypes and units of the last
 * NBIRTH/DBIRTH, the payload sequence number, and the death certificates.
 *
 * Pure and synchronous (no I/O, time passed in), so it is unit-tested without a broker; the
 * message handler (./message-handler.ts) turns its readings into samples and the connector
 * (./mqtt-connector.ts) sends the one thing ingest may ever publish, a rebirth request, only
 * when the source allows it.
 *
 * Section references are to the Sparkplug 3.0.0 specification; the `tck-id-…` names are its
 * normative statements.
 */
import { get as sparkplugCodec } from 'sparkplug-payload';
import type { UMetric, UPayload } from 'sparkplug-payload/lib/sparkplugbpayload';
import type { PayloadQuality } from '../../shared/contracts/mqtt-payload.ts';
import { SPARKPLUG_NAMESPACE } from '../pipeline/decode.ts';
import type { SparkplugStatus } from '../../shared/contracts/wiring.ts';


const codec = sparkplugCodec(SPARKPLUG_NAMESPACE)!;

/** The message_type elements of §4.1.3. */
export const SPARKPLUG_MESSAGE_TYPES = ['NBIRTH', 'NDEATH', 'DBIRTH', 'DDEATH', 'NDATA', 'DDATA', 'NCMD', 'DCMD', 'STATE'] as const;
export type SparkplugMessageType = (typeof SPARKPLUG_MESSAGE_TYPES)[number];

export interface SparkplugTopic {
  group: string;
  type: SparkplugMessageType;
  node: string;
  /** null on edge-node messages (§4.1.5: no device_id on NBIRTH, NDEATH, NDATA, NCMD). */
  device: string | null;
}

/**
 * `namespace/group_id/message_type/edge_node_id/[device_id]` (§4.1, tck-id-topic-structure);
 * device_id present exactly on DBIRTH, DDEATH, DDATA, DCMD (§4.1.5). STATE topics
 * (`spBv1.0/STATE/host_id`, §4.2.3) are a host's, not an edge node's.
 */
export function parseSparkplugTopic(topic: string): SparkplugTopic | { error: string } {
  const l = topic.split('/');
  if (l[0] !== SPARKPLUG_NAMESPACE) return { error: `not in the ${SPARKPLUG_NAMESPACE} namespace` };
  if (l[1] === 'STATE') return { group: '', type: 'STATE', node: l[2] ?? '', device: null };
  const type = l[2] as SparkplugMessageType;
  if (!SPARKPLUG_MESSAGE_TYPES.includes(type) || type === 'STATE') return { error: `unknown Sparkplug message type "${l[2] ?? ''}" (§4.1.3)` };
  const deviceType = type[0] === 'D';
  if (l.length !== (deviceType ? 5 : 4)) return { error: `${type} topic must be spBv1.0/group_id/${type}/edge_node_id${deviceType ? '/device_id' : ''} (§4.1)` };
  if (l.slice(1).some((x) => x === '')) return { error: 'empty group_id, edge_node_id or device_id (§4.1.2, §4.1.4, §4.1.5)' };
  return { group: l[1]!, type, node: l[3]!, device: deviceType ? l[4]! : null };
}

/**
 * The tag address of a Sparkplug metric: `group/node/device/metric`, device empty for an edge
 * node's own metrics. The metric name may itself contain slashes (folders, §6.4.6 Metric name), so an
 * address is matched as a whole, never split.
 */
export function sparkplugAddress(group: string, node: string, device: string | null, metric: string): string {
  return `${group}/${node}/${device ?? ''}/${metric}`;
}

/** The NCMD topic of an edge node (§4.2.1, tck-id-topics-ncmd-topic). */
export function ncmdTopic(group: string, node: string): string {
  return `${SPARKPLUG_NAMESPACE}/${group}/NCMD/${node}`;
}

/**
 * The standard rebirth request: an NCMD writing `Node Control/Rebirth` = true, the metric every
 * NBIRTH must declare (tck-id-topics-nbirth-rebirth-metric), with the timestamp the NCMD must
 * carry (tck-id-topics-ncmd-timestamp). Published with QoS 0, retain false (tck-id-topics-ncmd-mqtt).
 */
export function rebirthPayload(now: number): Buffer {
  return Buffer.from(codec.encodePayload({ timestamp: now, metrics: [{ name: 'Node Control/Rebirth', type: 'Boolean', value: true, timestamp: now }] }));
}

/** Minimum time between two rebirth requests to one edge node [ms]. */
export const REBIRTH_INTERVAL_MS = 60_000;

/** uint64 fields arrive as protobufjs `Long` objects (or numbers); values beyond 2^53 lose precision. */
function toNum(x: unknown): number | null {
  if (typeof x === 'number') return x;
  if (x !== null && typeof x === 'object' && typeof (x as { toNumber?: unknown }).toNumber === 'function') return (x as { toNumber(): number }).toNumber();
  return null;
}

interface MetricDef {
  name: string;
  type: string;
  unit: string | null;
}

interface NodeState {
  /** Whether an NBIRTH of the current session was seen. */
  born: boolean;
  online: boolean;
  bdSeq: number | null;
  lastSeq: number | null;
  /** Metric definitions by alias, across the node and all its devices (aliases are unique per edge node, tck-id-payloads-alias-uniqueness). */
  aliases: Map<number, { device: string | null; def: MetricDef }>;
  /** Per device (null = the node itself): the definitions its last birth gave, by name. */
  births: Map<string | null, Map<string, MetricDef>>;
  devicesOnline: Set<string>;
  /** Why this node needs a rebirth, or null. */
  rebirthReason: string | null;
  lastRebirthRequestAt: number;
  seqGaps: number;
}

/** One value read from a Sparkplug message, addressed as its tag would be. */
export interface SparkplugReading {
  address: string;
  v: number | null;
  ts: number;
  q: PayloadQuality;
  /** For discovery: what the birth said of this metric. */
  meta: { type: string; unit: string | null; alias: number | null };
}

/** A metric that cannot become a number; stored as a dead letter only when a tag maps it. */
export interface SparkplugUnreadable {
  address: string;
  reason: string;
  meta: SparkplugReading['meta'];
}

export interface SparkplugResult {
  readings: SparkplugReading[];
  unreadable: SparkplugUnreadable[];
  /** The whole message could not be used (undecodable, data before birth): dead-letter it with this reason. */
  deadLetter: string | null;
  /** Metrics whose alias is unknown, dead-lettered with this reason while the known ones are stored. */
  unknownAliases: string | null;
  /** A death certificate: mark every tag under this address prefix bad at `ts`. */
  death: { prefix: string; ts: number } | null;
  /** Nothing to store, with the reason counted in the status (host STATE, commands, a stale NDEATH). */
  ignored: string | null;
  /** An edge node whose rebirth request is due now (only sent when the source allows it). */
  rebirth: { group: string; node: string } | null;
  /** A readable rendering of the decoded payload, for dead letters (the protobuf bytes are not text). */
  rendered: string;
}

function emptyResult(): SparkplugResult {
  return { readings: [], unreadable: [], deadLetter: null, unknownAliases: null, death: null, ignored: null, rebirth: null, rendered: '' };
}

/**
 * Grade from the optional `Quality` property (§6.4.9 PropertyValue, Quality Codes: 0 BAD, 192 GOOD, 500 STALE);
 * absent means good.
 */
function propertyQuality(m: UMetric): PayloadQuality {
  const q = toNum(m.properties?.Quality?.value);
  if (q === null || q === 192) return 'good';
  return 'bad';
}

/** `engUnit`, the property Tahu and most edge gateways use for the engineering unit (common practice; the specification names no unit property). */
function propertyUnit(m: UMetric): string | null {
  const u = m.properties?.engUnit?.value ?? m.properties?.engUnits?.value;
  return typeof u === 'string' && u !== '' ? u : null;
}

const NUMERIC = new Set(['Int8', 'Int16', 'Int32', 'Int64', 'UInt8', 'UInt16', 'UInt32', 'UInt64', 'Float', 'Double']);

/** A metric value as a number: numeric types as they are, Boolean as 1/0 (the DataType enum of the §6.4.1 schema); anything else is not a process value. */
function metricNumber(type: string, value: unknown): { v: number | null } | { reason: string } {
  if (value === null || value === undefined) return { v: null };
  if (type === 'Boolean') return typeof value === 'boolean' ? { v: value ? 1 : 0 } : { reason: 'Boolean metric without a boolean value' };
  if (!NUMERIC.has(type)) return { reason: `datatype ${type || 'unknown'} is not numeric; only numeric and Boolean metrics can be stored` };
  const n = toNum(value);
  return n === null ? { reason: `${type} metric without a numeric value` } : { v: n };
}

function render(topic: string, p: UPayload): string {
  return JSON.stringify({
    topic,
    timestamp: toNum(p.timestamp),
    seq: toNum(p.seq),
    metrics: (p.metrics ?? []).slice(0, 200).map((m) => ({
      ...(m.name ? { name: m.name } : {}),
      ...(m.alias !== undefined && m.alias !== null ? { alias: toNum(m.alias) } : {}),
      type: m.type,
      value: typeof m.value === 'object' && m.value !== null ? (toNum(m.value) ?? '(complex)') : m.value,
      ...(m.timestamp !== undefined && m.timestamp !== null ? { timestamp: toNum(m.timestamp) } : {}),
    })),
  });
}

/**
 * Session state of every edge node seen on one source, and the decoding of its messages.
 *
 * - NBIRTH (§4.2.1, seq 0: tck-id-payloads-sequence-num-zero-nbirth) starts a new session of the
 *   edge node: previous aliases and device births are forgotten, its metrics defined.
 *   DBIRTH (§4.2.2) defines one device's metrics. Births also carry current values.
 * - NDATA/DDATA carry aliases only (tck-id-payloads-alias-data-cmd-requirement); an alias is
 *   resolved through the births of the current session. When it cannot be (ingest started after
 *   the birth), the message is dead-lettered with the reason, never guessed, and the edge node
 *   is listed as needing a rebirth.
 * - NDEATH (§4.2.1; whose bdSeq matches the NBIRTH's: tck-id-topics-nbirth-bdseq-matching) and
 *   DDEATH (§4.2.2): the spec says a host sets the data quality of the node's (device's) metrics
 *   to STALE; here that is a bad sample at the death time for every mapped tag under it. The
 *   NDEATH is the Will registered at CONNECT, so its own timestamp is from the connect; its
 *   death time is the receive time ("should note the timestamp when the NDEATH message was
 *   received", §4.2.1). A DDEATH is published by the edge node: its payload timestamp counts.
 * - seq: every message after the NBIRTH carries the previous one's seq + 1, 255 wrapping to 0
 *   (tck-id-payloads-sequence-num-incrementing); each missing number counts as one gap.
 * - Timestamps: the metric's (acquisition time), else the payload's (publish time), else receipt
 *   (§6.4.5 Payload timestamp, §6.4.6 Metric timestamp; both ms since the epoch, UTC).
 */
export class SparkplugState {
  private nodes = new Map<string, NodeState>();
  private counters = { messages: 0, seqGaps: 0, deaths: 0, rebirthRequests: 0, ignored: {} as Record<string, number> };

  constructor(private opts: { requestRebirth: boolean; rebirthIntervalMs?: number } = { requestRebirth: false }) {}

  private node(group: string, node: string): NodeState {
    const key = `${group}/${node}`;
    let n = this.nodes.get(key);
    if (!n) {
      n = { born: false, online: false, bdSeq: null, lastSeq: null, aliases: new Map(), births: new Map(), devicesOnline: new Set(), rebirthReason: null, lastRebirthRequestAt: -Infinity, seqGaps: 0 };
      this.nodes.set(key, n);
    }
    return n;
  }

  /** Counts a reason for metrics or messages that produced nothing (shown in the status). */
  ignore(reason: string, n = 1): void {
    this.counters.ignored[reason] = (this.counters.ignored[reason] ?? 0) + n;
  }

  /** The connector sent a rebirth request (counted in the status). */
  rebirthSent(): void {
    this.counters.rebirthRequests++;
  }

  handle(topic: string, payload: Buffer, receivedAt: number): SparkplugResult {
    const out = emptyResult();
    this.counters.messages++;
    const t = parseSparkplugTopic(topic);
    if ('error' in t) {
      out.deadLetter = `Sparkplug topic: ${t.error}`;
      return out;
    }
    if (t.type === 'STATE' || t.type === 'NCMD' || t.type === 'DCMD') {
      // A host's state (§4.2.3) or commands to edge nodes, our own rebirth requests among them: no data.
      out.ignored = `${t.type} messages carry no measurements`;
      this.ignore(out.ignored);
      return out;
    }
    let p: UPayload;
    try {
      p = codec.decodePayload(payload);
    } catch (err) {
      out.deadLetter = `not a Sparkplug B payload (§6.4.1 protobuf schema): ${(err as Error).message.slice(0, 200)}`;
      return out;
    }
    out.rendered = render(topic, p);
    const n = this.node(t.group, t.node);
    const payloadTs = toNum(p.timestamp);
    const seq = toNum(p.seq);

    if (t.type === 'NDEATH') {
      const bdSeq = toNum((p.metrics ?? []).find((m) => m.name === 'bdSeq')?.value);
      if (n.born && n.bdSeq !== null && bdSeq !== null && bdSeq !== n.bdSeq) {
        // The Will of an earlier session delivered late: the current session is alive.
        out.ignored = 'NDEATH of an earlier session (bdSeq does not match the NBIRTH)';
        this.ignore(out.ignored);
        return out;
      }
      this.endSession(n);
      this.counters.deaths++;
      out.death = { prefix: `${t.group}/${t.node}/`, ts: receivedAt };
      return out;
    }

    if (t.type === 'NBIRTH') {
      // A new session of the edge node (§4.2.1): nothing of the previous one carries over.
      this.endSession(n);
      n.born = true;
      n.online = true;
      n.rebirthReason = null;
      n.bdSeq = toNum((p.metrics ?? []).find((m) => m.name === 'bdSeq')?.value);
    }
    this.checkSeq(n, t.type, seq);
    if (t.type === 'DBIRTH') {
      this.forgetDevice(n, t.device);
      n.devicesOnline.add(t.device!);
    }
    if (t.type === 'DDEATH') {
      this.forgetDevice(n, t.device);
      n.devicesOnline.delete(t.device!);
      this.counters.deaths++;
      out.death = { prefix: `${t.group}/${t.node}/${t.device}/`, ts: payloadTs ?? receivedAt };
      return out;
    }

    const birth = t.type === 'NBIRTH' || t.type === 'DBIRTH';
    if (!birth && !n.born && !n.births.has(t.device)) {
      out.deadLetter = `${t.type} from edge node ${t.group}/${t.node}${t.device ? ` device ${t.device}` : ''} before any ${t.device ? 'DBIRTH' : 'NBIRTH'} seen by ingest: metric aliases unknown, a rebirth is needed (Sparkplug 3.0 §4.2)`;
      out.rebirth = this.needRebirth(n, t.group, t.node, out.deadLetter, receivedAt);
      return out;
    }

    const defs = birth ? new Map<string, MetricDef>() : n.births.get(t.device);
    const unknown: number[] = [];
    for (const m of p.metrics ?? []) {
      const alias = m.alias === undefined || m.alias === null ? null : toNum(m.alias);
      let def: MetricDef | undefined;
      if (birth) {
        if (!m.name) {
          this.ignore(`${t.type} metric without a name (tck-id-payloads-alias-birth-requirement)`);
          continue;
        }
        def = { name: m.name, type: m.type, unit: propertyUnit(m) };
        defs!.set(m.name, def);
        if (alias !== null) n.aliases.set(alias, { device: t.device, def });
      } else if (m.name) {
        // Aliases are optional (§6.4.6 Metric, alias): a DATA metric may carry its name instead.
        def = defs?.get(m.name) ?? { name: m.name, type: m.type, unit: null };
      } else if (alias !== null) {
        const a = n.aliases.get(alias);
        if (a && a.device === t.device) def = a.def;
      }
      if (!def) {
        if (alias !== null) unknown.push(alias);
        else this.ignore('metric with neither name nor alias');
        continue;
      }
      const type = m.type ?? def.type;
      const address = sparkplugAddress(t.group, t.node, t.device, def.name);
      const meta = { type, unit: def.unit, alias };
      if (m.type === undefined && !birth) {
        // The datatype is optional outside births (tck-id-payloads-metric-datatype-req), but
        // sparkplug-payload reads a value only by the datatype its own message carries: without
        // one it reports null, which must not be stored as a null reading.
        out.unreadable.push({ address, reason: `${def.name}: metric without a datatype in this ${t.type}; its value cannot be read`, meta });
        continue;
      }
      const val = metricNumber(type, m.value);
      if ('reason' in val) {
        out.unreadable.push({ address, reason: `${def.name}: ${val.reason}`, meta });
        continue;
      }
      const ts = toNum(m.timestamp) ?? payloadTs ?? receivedAt;
      out.readings.push({ address, v: val.v, ts, q: val.v === null ? 'bad' : propertyQuality(m), meta });
    }
    if (birth) n.births.set(t.device, defs!);
    if (unknown.length) {
      out.unknownAliases = `${t.type} from ${t.group}/${t.node}${t.device ? `/${t.device}` : ''}: alias${unknown.length > 1 ? 'es' : ''} ${unknown.slice(0, 20).join(', ')} not defined by the births ingest has seen; a rebirth is needed (Sparkplug 3.0 §6.4.6 alias)`;
      out.rebirth = this.needRebirth(n, t.group, t.node, out.unknownAliases, receivedAt);
    }
    return out;
  }

  /** §6.4.5 Payload seq: NBIRTH resets to 0; every later message of the node is the previous + 1 mod 256. */
  private checkSeq(n: NodeState, type: SparkplugMessageType, seq: number | null): void {
    if (seq === null) {
      this.ignore('message without seq (tck-id-payloads-sequence-num-always-included)');
      return;
    }
    if (type !== 'NBIRTH' && n.lastSeq !== null && seq !== n.lastSeq) {
      const missing = (seq - ((n.lastSeq + 1) % 256) + 256) % 256;
      n.seqGaps += missing;
      this.counters.seqGaps += missing;
    }
    n.lastSeq = seq % 256;
  }

  private endSession(n: NodeState): void {
    n.born = false;
    n.online = false;
    n.lastSeq = null;
    n.aliases.clear();
    n.births.clear();
    n.devicesOnline.clear();
  }

  private forgetDevice(n: NodeState, device: string | null): void {
    n.births.delete(device);
    for (const [alias, a] of n.aliases) if (a.device === device) n.aliases.delete(alias);
  }

  /**
   * Marks the node as needing a rebirth; returns it when the source allows requests and none was
   * due for this node within the interval (at most one per node per minute by default).
   */
  private needRebirth(n: NodeState, group: string, node: string, reason: string, now: number): { group: string; node: string } | null {
    n.rebirthReason = reason;
    if (!this.opts.requestRebirth) return null;
    if (now - n.lastRebirthRequestAt < (this.opts.rebirthIntervalMs ?? REBIRTH_INTERVAL_MS)) return null;
    n.lastRebirthRequestAt = now;
    return { group, node };
  }

  status(): SparkplugStatus {
    const needRebirth: SparkplugStatus['needRebirth'] = [];
    const edgeNodes: SparkplugStatus['edgeNodes'] = [];
    for (const [key, n] of this.nodes) {
      if (n.rebirthReason) needRebirth.push({ edgeNode: key, reason: n.rebirthReason });
      if (edgeNodes.length < 200) edgeNodes.push({ edgeNode: key, online: n.online, bdSeq: n.bdSeq, seq: n.lastSeq, seqGaps: n.seqGaps, devicesOnline: [...n.devicesOnline].slice(0, 100) });
    }
    return {
      messages: this.counters.messages,
      seqGaps: this.counters.seqGaps,
      deaths: this.counters.deaths,
      rebirthRequests: this.counters.rebirthRequests,
      needRebirth,
      ignored: { ...this.counters.ignored },
      edgeNodes,
    };
  }
}
