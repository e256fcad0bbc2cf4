import { decodePayload, looksLikeBatch } from '../pipeline/decode.ts';
import { isSample } from '../pipeline/quality.ts';
import type { TagSet } from '../pipeline/tag-set.ts';
import { TopicMap } from '../pipeline/topic-match.ts';
import { deadLetter, type DeadLetter, type Sample } from '../pipeline/types.ts';
import { Discovery } from './discovery.ts';

export interface HandledMessage {
  samples: Sample[];
  deadLetters: DeadLetter[];
  /** Readings whose topic no tag maps (counted, listed in discovery, never dead-lettered). */
  unmapped: number;
  /** Readings dropped by a deadband. */
  suppressed: number;
}

/**
 * MQTT message → samples for one source: topic → tag (exact or MQTT wildcard filter), decode,
 * scale, grade. Synchronous and free of I/O so it is tested without a broker.
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
  ) {
    this.rebuild();
  }

  rebuild(): void {
    this.map = new TopicMap<number>();
    this.invalidFilters = [];
    for (const p of this.tags.all()) {
      const err = this.map.add(p.tag.address, p.tag.id);
      if (err) this.invalidFilters.push({ tagId: p.tag.id, address: p.tag.address, error: err.error });
    }
  }

  handle(topic: string, payload: Buffer, receivedAt: number): HandledMessage {
    const out: HandledMessage = { samples: [], deadLetters: [], unmapped: 0, suppressed: 0 };
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
}
