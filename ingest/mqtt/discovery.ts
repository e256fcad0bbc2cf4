/** What the wiring view shows for one topic seen on a broker. */
export interface DiscoveredTopic {
  topic: string;
  /** First 256 characters of the last payload. */
  lastPayload: string;
  lastSeen: string;
  count: number;
  tagId: number | null;
}

const MAX_TOPICS = 5_000;
const PAYLOAD_PREVIEW = 256;

/**
 * Topics seen on one source with their last payload, bounded so a topic storm cannot exhaust
 * memory: beyond MAX_TOPICS new topics are only counted (`overflow`).
 */
export class Discovery {
  private topics = new Map<string, { last: unknown; lastSeen: number; count: number; tagId: number | null }>();
  overflow = 0;

  /** `payload` is a Buffer, a string or a decoded item (stringified only when listed, off the hot path). */
  see(topic: string, payload: unknown, tagId: number | null, now: number): void {
    const e = this.topics.get(topic);
    if (e) {
      e.last = payload;
      e.lastSeen = now;
      e.count++;
      e.tagId = tagId;
      return;
    }
    if (this.topics.size >= MAX_TOPICS) {
      this.overflow++;
      return;
    }
    this.topics.set(topic, { last: payload, lastSeen: now, count: 1, tagId });
  }

  list(): DiscoveredTopic[] {
    return [...this.topics.entries()]
      .map(([topic, e]) => ({
        topic,
        lastPayload: preview(e.last).slice(0, PAYLOAD_PREVIEW),
        lastSeen: new Date(e.lastSeen).toISOString(),
        count: e.count,
        tagId: e.tagId,
      }))
      .sort((a, b) => a.topic.localeCompare(b.topic));
  }

  get size(): number {
    return this.topics.size;
  }
}

function preview(p: unknown): string {
  if (Buffer.isBuffer(p)) return p.subarray(0, PAYLOAD_PREVIEW * 4).toString('utf8');
  if (typeof p === 'string') return p;
  return JSON.stringify(p) ?? '';
}
