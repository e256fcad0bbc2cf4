/**
 * In-memory persistence for the embedded broker: aedes-persistence 11's memory store with the
 * outgoing queues (QoS 1/2 messages for persistent sessions, held until the client's PUBACK)
 * indexed.
 *
 * Why: the stock store keeps each client's outgoing queue as an array and finds a packet by a
 * linear scan — once when the packet is given its packet identifier (outgoingUpdate, the packet
 * is at the end, so every scan walks the whole queue) and once more on PUBACK, followed by a
 * splice. Ingest holds its PUBACKs until a batch is committed (ingest/mqtt/mqtt-connector.ts),
 * so thousands of messages are in flight at once and delivery became quadratic: a persistent
 * QoS 1 subscriber got about 14 000 messages/s where a clean-session one got 30 000
 * (tests/bench/ingest.bench.ts). Here both lookups are hash lookups and removal is O(1).
 * `npm run bench:ingest -- --stock` (2026-12-02, host under heavy load, medians of three
 * rounds): single-value QoS 1 10 278/s against 7 367/s with the stock store (+40 %); broker CPU
 * 12 against 28 µs per message. It plugs in through aedes' documented `persistence` option.
 *
 * Semantics kept from the stock store (MQTT 3.1.1 §4.4, message delivery retry; §4.6 ordering):
 * the queue is kept in arrival order and streamed in that order on reconnect; outgoingUpdate
 * finds the queued copy of a packet by (brokerId, brokerCounter) and records its packet
 * identifier, or — for a packet of another broker instance, e.g. a PUBREL — replaces the
 * queued packet with the same identifier; outgoingClearMessageId removes and returns the
 * oldest queued packet with that identifier.
 */
import { createRequire } from 'node:module';
import { Readable } from 'node:stream';
import type { AedesPacket } from 'aedes-packet';
import type MemoryPersistenceType from 'aedes-persistence/types/asyncPersistence.d.ts';

const require = createRequire(import.meta.url);
// The memory store is a CommonJS class not re-exported by the package's typed entry point.
const MemoryPersistence = require('aedes-persistence/asyncPersistence.js') as typeof MemoryPersistenceType;
const Packet = require('aedes-packet') as new (original: AedesPacket) => AedesPacket;

type Queued = AedesPacket & { messageId?: number };

/**
 * Broker counter → queue position, per broker id. Two levels instead of one string key: the
 * broker id is the same string object for every packet of this broker (its hash is computed
 * once), and the counter is a number, so a lookup builds no string. The one-level string key
 * (`${brokerId}\0${brokerCounter}`, three times per message) cost about 0.5 s of the broker's
 * CPU per 150 000 messages in tests/bench/ingest.bench.ts.
 */
class CounterIndex {
  private byBroker = new Map<string, Map<number, number>>();
  /** The last broker id looked up and its map: nearly every packet is this broker's own. */
  private lastId: string | null = null;
  private lastMap: Map<number, number> | undefined;

  private counters(brokerId: string): Map<number, number> | undefined {
    if (brokerId === this.lastId) return this.lastMap;
    const m = this.byBroker.get(brokerId);
    if (m) {
      this.lastId = brokerId;
      this.lastMap = m;
    }
    return m;
  }

  get(p: Queued): number | undefined {
    return this.counters(p.brokerId)?.get(p.brokerCounter);
  }

  set(p: Queued, s: number): void {
    let m = this.counters(p.brokerId);
    if (!m) this.byBroker.set(p.brokerId, (m = new Map()));
    m.set(p.brokerCounter, s);
  }

  /** Removes p's entry if it still points at position s. */
  delete(p: Queued, s: number): void {
    const m = this.counters(p.brokerId);
    if (m?.get(p.brokerCounter) !== s) return;
    m.delete(p.brokerCounter);
    if (m.size === 0) {
      this.byBroker.delete(p.brokerId);
      if (this.lastId === p.brokerId) {
        this.lastId = null;
        this.lastMap = undefined;
      }
    }
  }
}

/** One client's outgoing queue: insertion-ordered, indexed by broker counter and packet identifier. */
export class OutgoingQueue {
  private entries = new Map<number, Queued>();
  private seq = 0;
  private byCounter = new CounterIndex();
  /**
   * Packet identifier → the queue position holding it, or positions oldest first when a reused
   * identifier is queued more than once (rare: an array only then, none per message).
   */
  private byMessageId = new Map<number, number | number[]>();

  get size(): number {
    return this.entries.size;
  }

  push(p: Queued): void {
    const s = ++this.seq;
    this.entries.set(s, p);
    this.byCounter.set(p, s);
    if (p.messageId !== undefined) this.indexId(p.messageId, s);
  }

  private indexId(id: number, s: number): void {
    const cur = this.byMessageId.get(id);
    if (cur === undefined) this.byMessageId.set(id, s);
    else if (typeof cur === 'number') this.byMessageId.set(id, cur < s ? [cur, s] : [s, cur]);
    else {
      // keep queue order: a later position goes after the earlier ones
      let i = cur.length;
      while (i > 0 && cur[i - 1]! > s) i--;
      cur.splice(i, 0, s);
    }
  }

  private unindexId(id: number | undefined, s: number): void {
    if (id === undefined) return;
    const cur = this.byMessageId.get(id);
    if (cur === undefined) return;
    if (typeof cur === 'number') {
      if (cur === s) this.byMessageId.delete(id);
      return;
    }
    const i = cur.indexOf(s);
    if (i >= 0) cur.splice(i, 1);
    if (cur.length === 1) this.byMessageId.set(id, cur[0]!);
    else if (cur.length === 0) this.byMessageId.delete(id);
  }

  private positions(id: number): readonly number[] {
    const cur = this.byMessageId.get(id);
    return cur === undefined ? [] : typeof cur === 'number' ? [cur] : cur;
  }

  /** Records the packet identifier of a queued packet, or replaces the one it supersedes; false if neither is queued. */
  update(p: Queued): boolean {
    const s = this.byCounter.get(p);
    const e = s === undefined ? undefined : this.entries.get(s);
    if (s !== undefined && e) {
      if (e.messageId !== p.messageId) {
        this.unindexId(e.messageId, s);
        e.messageId = p.messageId;
        if (p.messageId !== undefined) this.indexId(p.messageId, s);
      }
      return true;
    }
    if (p.messageId === undefined) return false;
    for (const t of this.positions(p.messageId)) {
      const q = this.entries.get(t)!;
      if (q.brokerId !== p.brokerId) {
        this.entries.set(t, p);
        this.byCounter.delete(q, t);
        this.byCounter.set(p, t);
        return true;
      }
    }
    return false;
  }

  /** Removes and returns the oldest queued packet with this identifier. */
  clear(messageId: number): Queued | undefined {
    const cur = this.byMessageId.get(messageId);
    if (cur === undefined) return undefined;
    let s: number;
    if (typeof cur === 'number') {
      s = cur;
      this.byMessageId.delete(messageId);
    } else {
      s = cur.shift()!;
      if (cur.length === 1) this.byMessageId.set(messageId, cur[0]!);
      else if (cur.length === 0) this.byMessageId.delete(messageId);
    }
    const e = this.entries.get(s)!;
    this.entries.delete(s);
    this.byCounter.delete(e, s);
    return e;
  }

  /** Removes the queued copy of `p` (same broker id and counter), if any (replaying a durable log). */
  remove(p: Pick<Queued, 'brokerId' | 'brokerCounter'>): boolean {
    const s = this.byCounter.get(p as Queued);
    const e = s === undefined ? undefined : this.entries.get(s);
    if (s === undefined || !e) return false;
    this.entries.delete(s);
    this.byCounter.delete(e, s);
    this.unindexId(e.messageId, s);
    return true;
  }

  snapshot(): Queued[] {
    return [...this.entries.values()];
  }
}

/** Topics whose matching subscriptions are remembered; past this the memo starts afresh. */
const MAX_MEMO_TOPICS = 50_000;

export class IndexedMemoryPersistence extends MemoryPersistence {
  protected queues = new Map<string, OutgoingQueue>();
  /**
   * Topic → the persistent QoS > 0 subscriptions matching it. aedes asks this for every QoS 1
   * PUBLISH (to queue it for persistent sessions); a plant's tags publish on a fixed set of
   * topics, so the trie walk is done once per topic until a subscription changes.
   */
  private byTopic = new Map<string, unknown>();
  /** Bumped whenever a subscription changes, so a match read before the change is not memoised after it. */
  private subsVersion = 0;

  private forgetMatches(): void {
    this.subsVersion++;
    this.byTopic.clear();
  }

  override async addSubscriptions(...args: Parameters<MemoryPersistenceType['addSubscriptions']>): Promise<void> {
    const done = super.addSubscriptions(...args);
    this.forgetMatches();
    await done;
  }

  override async removeSubscriptions(...args: Parameters<MemoryPersistenceType['removeSubscriptions']>): Promise<void> {
    const done = super.removeSubscriptions(...args);
    this.forgetMatches();
    await done;
  }

  override async cleanSubscriptions(...args: Parameters<MemoryPersistenceType['cleanSubscriptions']>): Promise<void> {
    const done = super.cleanSubscriptions(...args);
    this.forgetMatches();
    await done;
  }

  override subscriptionsByTopic(topic: string): ReturnType<MemoryPersistenceType['subscriptionsByTopic']> {
    const hit = this.byTopic.get(topic) as Awaited<ReturnType<MemoryPersistenceType['subscriptionsByTopic']>> | undefined;
    if (hit) return Promise.resolve(hit);
    const p = super.subscriptionsByTopic(topic);
    if (this.byTopic.size >= MAX_MEMO_TOPICS) this.byTopic.clear();
    const version = this.subsVersion;
    void p.then((subs) => {
      if (version === this.subsVersion) this.byTopic.set(topic, subs);
    });
    return p;
  }

  protected queue(clientId: string): OutgoingQueue {
    let q = this.queues.get(clientId);
    if (!q) this.queues.set(clientId, (q = new OutgoingQueue()));
    return q;
  }

  override async outgoingEnqueue(sub: { clientId: string }, packet: AedesPacket): Promise<void> {
    this.queue(sub.clientId).push(new Packet(packet));
  }

  override async outgoingEnqueueCombi(subs: { clientId: string }[], packet: AedesPacket): Promise<void> {
    for (const sub of subs) this.queue(sub.clientId).push(new Packet(packet));
  }

  override async outgoingUpdate(client: { id: string }, packet: AedesPacket): Promise<void> {
    if (!this.queue(client.id).update(packet)) throw new Error('no such packet');
  }

  override async outgoingClearMessageId(client: { id: string }, packet: AedesPacket): Promise<AedesPacket> {
    const id = (packet as Queued).messageId;
    // The stock store resolves undefined when nothing matches; aedes relies on that.
    return (id === undefined ? undefined : this.queues.get(client.id)?.clear(id)) as AedesPacket;
  }

  override outgoingStream(client: { id: string }): Readable {
    // a copy, as the stock store does, so clearing while streaming is safe
    return Readable.from(this.queues.get(client.id)?.snapshot() ?? []);
  }

  /** Messages queued for a client (tests and status). */
  outgoingCount(clientId: string): number {
    return this.queues.get(clientId)?.size ?? 0;
  }
}
