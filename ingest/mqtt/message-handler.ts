import type { MqttPayloadFormat } from '../../shared/contracts/wiring.ts';
import { decodePayload, looksLikeBatch, payloadDecoder } from '../pipeline/decode.ts';
import { isSample } from '../pipeline/quality.ts';
import type { TagSet } from '../pipeline/tag-set.ts';
import { TopicMap } from '../pipeline/topic-match.ts';
import { deadLetter, keyByDelivery, mqttDelivery, type DeadLetter, type Sample } from '../pipeline/types.ts';
import { Discovery } from './discovery.ts';
import { SparkplugState, type SparkplugResult } from './sparkplug.ts';

export interface HandledMessage {
  samples: Sample[];
  deadLetters: DeadLetter[];
  /** Readings whose topic no tag maps (counted, listed in discovery, never dead-lettered). */
  unmapped: number;
  /** Readings dropped by a deadband. */
  suppressed: number;
  /** Sparkplug B: an edge node to send a rebirth request to (only ever set when the source allows it). */
  rebirth?: { group: string; node: string } | null;
}

/** ISO 8601 for discovery; a timestamp outside the Date range is shown as it came. */
function isoOrRaw(ts: number): string {
  const d = new Date(ts);
  return Number.isNaN(d.getTime()) ? String(ts) : d.toISOString();
}

/** The source options the handler needs (shared/contracts/wiring.ts). */
export interface HandlerOptions {
  payload: MqttPayloadFormat;
  requestRebirth: boolean;
}

/**
 * MQTT message → samples for one source: topic → tag (exact or MQTT wildcard filter), decode,
 * scale, grade. Synchronous and free of I/O so it is tested without a broker.
 *
 * Sparkplug B messages (topics under spBv1.0/, see payloadDecoder) go through the source's
 * SparkplugState (./sparkplug.ts); each metric is then a reading addressed
 * `group/node/device/metric`, mapped to a tag by that address exactly as a topic is.
 */
export class MqttMessageHandler {
  private map = new TopicMap<number>();
  /** Tag filters that are not valid MQTT topic filters (reported in the status). */
  invalidFilters: { tagId: number; address: string; error: string }[] = [];

  constructor(
    private sourceId: number,
    private tags: TagSet,
    /** Where every topic seen is reported (the ingest service saves it to `mqtt_discovery`). */
    readonly discovery: Discovery = new Discovery(),
    private opts: HandlerOptions = { payload: 'json', requestRebirth: false },
  ) {
    this.rebuild();
  }

  /** Sparkplug B session state, created with the first Sparkplug message. */
  sparkplug: SparkplugState | null = null;

  rebuild(): void {
    this.map = new TopicMap<number>();
    this.invalidFilters = [];
    for (const p of this.tags.all()) {
      const err = this.map.add(p.tag.address, p.tag.id);
      if (err) this.invalidFilters.push({ tagId: p.tag.id, address: p.tag.address, error: err.error });
    }
  }

  /**
   * Its dead letters carry the message's delivery identity (topic and a digest of its bytes), so
   * the same message delivered again — after a lost PUBACK, by a broker that restored its queue,
   * or published again — is counted on the stored letter, not stored twice.
   */
  handle(topic: string, payload: Buffer, receivedAt: number): HandledMessage {
    const out = this.decode(topic, payload, receivedAt);
    if (out.deadLetters.length) keyByDelivery(out.deadLetters, mqttDelivery(topic, payload));
    return out;
  }

  private decode(topic: string, payload: Buffer, receivedAt: number): HandledMessage {
    const out: HandledMessage = { samples: [], deadLetters: [], unmapped: 0, suppressed: 0 };
    const decoder = payloadDecoder(topic, this.opts.payload);
    if (decoder === 'sparkplugB') return this.handleSparkplug(topic, payload, receivedAt, out);
    if (decoder === 'other') {
      // A Sparkplug-only source: anything outside the namespace is another system's traffic.
      this.discovery.see(topic, payload, null, receivedAt);
      out.unmapped = 1;
      return out;
    }
    const topicTag = this.map.get(topic);
    if (topicTag === undefined && !looksLikeBatch(payload)) {
      this.discovery.see(topic, payload, null, receivedAt);
      out.unmapped = 1;
      return out;
    }
    const decoded = decodePayload(topic, payload);
    if (!decoded.ok) {
      this.discovery.see(topic, payload, topicTag ?? null, receivedAt);
      out.deadLetters.push(deadLetter(this.sourceId, topic, payload, decoded.reason, receivedAt));
      return out;
    }
    const single = decoded.items.length === 1 && decoded.items[0]!.topic === topic && decoded.errors.length === 0;
    if (single) this.discovery.see(topic, payload, topicTag ?? null, receivedAt);
    for (const e of decoded.errors) {
      out.deadLetters.push(deadLetter(this.sourceId, topic, JSON.stringify(e.item) ?? String(e.item), e.reason, receivedAt));
    }
    for (const item of decoded.items) {
      const tagId = item.topic === topic ? topicTag : this.map.get(item.topic);
      if (!single) this.discovery.see(item.topic, item, tagId ?? null, receivedAt);
      const proc = tagId === undefined ? undefined : this.tags.get(tagId);
      if (!proc) {
        out.unmapped++;
        continue;
      }
      const r = proc.process(item.v, item.ts ?? receivedAt, item.q, receivedAt);
      if (r === null) out.suppressed++;
      else if (isSample(r)) out.samples.push(r);
      else out.deadLetters.push(deadLetter(this.sourceId, item.topic, single ? payload : JSON.stringify(item), r.reason, receivedAt));
    }
    return out;
  }

  private handleSparkplug(topic: string, payload: Buffer, receivedAt: number, out: HandledMessage): HandledMessage {
    this.sparkplug ??= new SparkplugState({ requestRebirth: this.opts.requestRebirth });
    const sp = this.sparkplug;
    const r: SparkplugResult = sp.handle(topic, payload, receivedAt);
    out.rebirth = r.rebirth;
    const letterPayload = r.rendered || payload;
    if (r.deadLetter) {
      out.deadLetters.push(deadLetter(this.sourceId, topic, letterPayload, r.deadLetter, receivedAt));
      return out;
    }
    if (r.unknownAliases) out.deadLetters.push(deadLetter(this.sourceId, topic, letterPayload, r.unknownAliases, receivedAt));
    if (r.death) {
      // STALE per the death certificate: a bad sample at the death time for every tag under the node (device).
      for (const p of this.tags.all()) {
        if (!p.tag.address.startsWith(r.death.prefix)) continue;
        const s = p.process(null, r.death.ts, 'bad', receivedAt);
        if (isSample(s)) out.samples.push(s);
      }
    }
    for (const u of r.unreadable) {
      const tagId = this.map.get(u.address);
      this.discovery.see(u.address, { ...u.meta, v: null, error: u.reason }, tagId ?? null, receivedAt);
      if (tagId === undefined) {
        sp.ignore('unmapped metric of a datatype that is not numeric or Boolean');
        out.unmapped++;
      } else {
        out.deadLetters.push(deadLetter(this.sourceId, u.address, letterPayload, u.reason, receivedAt));
      }
    }
    for (const x of r.readings) {
      const tagId = this.map.get(x.address);
      this.discovery.see(x.address, { v: x.v, ts: isoOrRaw(x.ts), q: x.q, ...x.meta }, tagId ?? null, receivedAt);
      const proc = tagId === undefined ? undefined : this.tags.get(tagId);
      if (!proc) {
        out.unmapped++;
        continue;
      }
      const res = proc.process(x.v, x.ts, x.q, receivedAt);
      if (res === null) out.suppressed++;
      else if (isSample(res)) out.samples.push(res);
      else out.deadLetters.push(deadLetter(this.sourceId, x.address, letterPayload, res.reason, receivedAt));
    }
    return out;
  }
}
