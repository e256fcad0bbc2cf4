/**
 * The embedded broker's store kept across a broker restart: ./indexed-persistence.ts (in
 * memory, indexed) with every change to the persistent sessions' subscriptions and outgoing
 * queues also appended to a write-ahead log, `<dataDir>/broker/queue.log`, and replayed at the
 * next start. It plugs in through aedes' documented `persistence` option like the memory store.
 *
 * What it keeps: subscriptions (so ingest's persistent session, MQTT 3.1.1 §3.1.2.4, still
 * receives what is published while it or the broker was down) and the QoS 1/2 messages queued
 * for them until the subscriber's PUBACK (§4.4 message delivery retry). What it does not keep:
 * retained messages and wills (the product uses neither), and incoming QoS 2 state.
 *
 * How durable: records of one turn of the event loop are written with one write(2) at the end of
 * the turn, and fdatasync'd at most once a second. A killed broker process (SIGKILL) loses
 * nothing the kernel has; a power cut can lose the last second. aedes writes a QoS 1 PUBACK
 * before it queues the message (lib/handlers/publish.js), so a broker killed in that instant
 * loses that message; SIGTERM closes the broker, which writes and syncs the log first.
 *
 * The log is JSON lines (payloads base64). At start it is replayed and rewritten as a snapshot
 * of what is still queued (write to a temporary file, fsync, rename); while running it is
 * compacted the same way when it has grown by COMPACT_BYTES since the last snapshot. A torn
 * last line (killed mid-write) is skipped.
 */
import fs from 'node:fs';
import path from 'node:path';
import type { AedesPacket } from 'aedes-packet';
import { IndexedMemoryPersistence } from './indexed-persistence.ts';

type Sub = { topic: string; qos: number; rh?: number; rap?: boolean; nl?: boolean };
type Client = { id: string };

interface StoredPacket {
  cmd: string;
  brokerId: string;
  brokerCounter: number;
  topic: string;
  payload: string;
  qos: number;
  retain: boolean;
  dup: boolean;
  messageId?: number;
}

type LogRecord =
  | { k: 'sub'; c: string; s: Sub[] }
  | { k: 'unsub'; c: string; t: string[] }
  | { k: 'clean'; c: string }
  | { k: 'enq'; c: string[]; p: StoredPacket }
  | { k: 'upd'; c: string; b: string; n: number; p: StoredPacket }
  | { k: 'ack'; c: string; b: string; n: number };

/** Rewrite the log once it has grown this much beyond the last snapshot. */
const COMPACT_BYTES = 64 * 1024 * 1024;
const SYNC_MS = 1000;

type PublishLike = { cmd: string; brokerId: string; brokerCounter: number; topic: string; payload: Buffer | string; qos: number; retain: boolean; dup: boolean; messageId?: number };

function store(packet: AedesPacket): StoredPacket {
  const p = packet as unknown as PublishLike;
  return {
    cmd: p.cmd,
    brokerId: p.brokerId,
    brokerCounter: p.brokerCounter,
    topic: p.topic,
    payload: Buffer.from(p.payload).toString('base64'),
    qos: p.qos,
    retain: p.retain,
    dup: p.dup,
    ...(p.messageId !== undefined ? { messageId: p.messageId } : {}),
  };
}

function revive(s: StoredPacket): AedesPacket & { messageId?: number } {
  return { ...s, payload: Buffer.from(s.payload, 'base64') } as unknown as AedesPacket & { messageId?: number };
}

export class DurablePersistence extends IndexedMemoryPersistence {
  private readonly file: string;
  private fd = -1;
  private pending: string[] = [];
  private flushScheduled = false;
  private unsynced = false;
  private syncTimer: NodeJS.Timeout | null = null;
  private grownBytes = 0;
  private replaying = false;
  /** The subscriptions as the log knows them, for snapshots. */
  private readonly subs = new Map<string, Map<string, Sub>>();

  constructor(dir: string) {
    super();
    fs.mkdirSync(dir, { recursive: true, mode: 0o700 });
    this.file = path.join(dir, 'queue.log');
  }

  /** Replays the log, rewrites it as a snapshot and opens it for appending. Call before the broker starts. */
  async open(): Promise<{ clients: number; queued: number }> {
    if (fs.existsSync(this.file)) {
      this.replaying = true;
      try {
        for (const line of fs.readFileSync(this.file, 'utf8').split('\n')) {
          if (!line) continue;
          let r: LogRecord;
          try {
            r = JSON.parse(line) as LogRecord;
          } catch {
            continue;
          }
          await this.apply(r);
        }
      } finally {
        this.replaying = false;
      }
    }
    this.snapshot();
    this.syncTimer = setInterval(() => this.sync(), SYNC_MS);
    this.syncTimer.unref();
    let queued = 0;
    for (const q of this.queues.values()) queued += q.size;
    return { clients: this.subs.size, queued };
  }

  private async apply(r: LogRecord): Promise<void> {
    switch (r.k) {
      case 'sub':
        return this.addSubscriptions({ id: r.c } as never, r.s as never);
      case 'unsub':
        return this.removeSubscriptions({ id: r.c } as never, r.t);
      case 'clean':
        return this.cleanSubscriptions({ id: r.c } as never);
      case 'enq':
        for (const c of r.c) this.queue(c).push(revive(r.p));
        return;
      case 'upd':
        this.queue(r.c).update(revive(r.p));
        return;
      case 'ack':
        this.queues.get(r.c)?.remove({ brokerId: r.b, brokerCounter: r.n });
        return;
    }
  }

  private log(r: LogRecord): void {
    if (this.replaying || this.fd < 0) return;
    this.pending.push(JSON.stringify(r));
    if (!this.flushScheduled) {
      this.flushScheduled = true;
      setImmediate(() => this.flush());
    }
  }

  /** Writes what this turn logged in one write(2). */
  flush(): void {
    this.flushScheduled = false;
    if (this.pending.length === 0 || this.fd < 0) return;
    const text = `${this.pending.join('\n')}\n`;
    this.pending = [];
    const n = fs.writeSync(this.fd, text);
    this.unsynced = true;
    this.grownBytes += n;
    if (this.grownBytes > COMPACT_BYTES) this.snapshot();
  }

  private sync(): void {
    if (!this.unsynced || this.fd < 0) return;
    this.unsynced = false;
    fs.fdatasyncSync(this.fd);
  }

  /** Rewrites the log as the current state: the subscriptions, then each queue in order. */
  private snapshot(): void {
    if (this.fd >= 0) {
      this.flush();
      fs.closeSync(this.fd);
      this.fd = -1;
    }
    const tmp = `${this.file}.tmp`;
    const fd = fs.openSync(tmp, 'w', 0o600);
    const lines: string[] = [];
    const out = () => {
      if (lines.length) fs.writeSync(fd, `${lines.join('\n')}\n`);
      lines.length = 0;
    };
    for (const [c, m] of this.subs) lines.push(JSON.stringify({ k: 'sub', c, s: [...m.values()] } satisfies LogRecord));
    for (const [c, q] of this.queues) {
      for (const p of q.snapshot()) {
        lines.push(JSON.stringify({ k: 'enq', c: [c], p: store(p) } satisfies LogRecord));
        if (lines.length >= 5000) out();
      }
    }
    out();
    fs.fsyncSync(fd);
    fs.closeSync(fd);
    fs.renameSync(tmp, this.file);
    this.fd = fs.openSync(this.file, 'a', 0o600);
    this.grownBytes = 0;
    this.unsynced = false;
  }

  override async addSubscriptions(client: Client, subs: Sub[]): Promise<void> {
    let m = this.subs.get(client.id);
    if (!m) this.subs.set(client.id, (m = new Map()));
    for (const s of subs) m.set(s.topic, { topic: s.topic, qos: s.qos, ...(s.rh !== undefined ? { rh: s.rh } : {}), ...(s.rap !== undefined ? { rap: s.rap } : {}), ...(s.nl !== undefined ? { nl: s.nl } : {}) });
    this.log({ k: 'sub', c: client.id, s: subs.map((s) => m.get(s.topic)!) });
    return super.addSubscriptions(client as never, subs as never);
  }

  override async removeSubscriptions(client: Client, topics: string[]): Promise<void> {
    const m = this.subs.get(client.id);
    for (const t of topics) m?.delete(t);
    this.log({ k: 'unsub', c: client.id, t: topics });
    return super.removeSubscriptions(client as never, topics);
  }

  override async cleanSubscriptions(client: Client): Promise<void> {
    this.subs.delete(client.id);
    this.log({ k: 'clean', c: client.id });
    return super.cleanSubscriptions(client as never);
  }

  override async outgoingEnqueue(sub: { clientId: string }, packet: AedesPacket): Promise<void> {
    this.log({ k: 'enq', c: [sub.clientId], p: store(packet) });
    return super.outgoingEnqueue(sub, packet);
  }

  override async outgoingEnqueueCombi(subs: { clientId: string }[], packet: AedesPacket): Promise<void> {
    if (subs.length) this.log({ k: 'enq', c: subs.map((s) => s.clientId), p: store(packet) });
    return super.outgoingEnqueueCombi(subs, packet);
  }

  override async outgoingUpdate(client: Client, packet: AedesPacket): Promise<void> {
    const p = packet as unknown as PublishLike;
    await super.outgoingUpdate(client, packet);
    // A PUBLISH only gets its packet identifier here, which a restarted broker assigns anew when
    // it resends the queue: not logged (the acknowledgement below names the message by broker id
    // and counter). A PUBREL replaces the queued PUBLISH (QoS 2): that is logged.
    if (p.cmd !== 'publish') this.log({ k: 'upd', c: client.id, b: p.brokerId, n: p.brokerCounter, p: store(packet) });
  }

  override async outgoingClearMessageId(client: Client, packet: AedesPacket): Promise<AedesPacket> {
    const removed = await super.outgoingClearMessageId(client, packet);
    if (removed) {
      const r = removed as unknown as PublishLike;
      this.log({ k: 'ack', c: client.id, b: r.brokerId, n: r.brokerCounter });
    }
    return removed;
  }

  /** Writes and syncs what is pending and closes the log (the broker's clean stop). */
  close(): void {
    if (this.syncTimer) clearInterval(this.syncTimer);
    this.syncTimer = null;
    if (this.fd < 0) return;
    this.flush();
    fs.fdatasyncSync(this.fd);
    fs.closeSync(this.fd);
    this.fd = -1;
  }

  override async destroy(): Promise<void> {
    this.close();
    return super.destroy();
  }
}
