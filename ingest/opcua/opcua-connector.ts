import {
  DataChangeFilter,
  DataChangeTrigger,
  DeadbandType,
  AttributeIds,
  ClientMonitoredItem,
  ClientSubscription,
  DataType,
  HistoryData,
  StatusCodes,
  type HistoryReadResult,
  TimestampsToReturn,
  type ClientSession,
  type DataValue,
  type OPCUAClient,
} from 'node-opcua';
import type pg from 'pg';
import type { Logger } from 'pino';
import { sourceStatusBase, type Connector, type ConnectorStatus, type ConnectionState, type SourceConfig } from '../connector.ts';
import { isSample } from '../pipeline/quality.ts';
import { TagSet } from '../pipeline/tag-set.ts';
import { deadLetter, opcuaDelivery, type TagConfig } from '../pipeline/types.ts';
import type { BatchWriter } from '../sink/batch-writer.ts';
import { clientIdentity, createClient, parseOpcuaOptions, userIdentity } from './opcua-client.ts';
import type { OpcuaSourceOptions } from './opcua-options.ts';
import { gradeOfStatusCode, numericValue } from './status-quality.ts';

/**
 * One OPC UA source: a session with one subscription and a monitored item per tag (sampling
 * interval per tag, OPC 10000-4 §5.12), source timestamps and StatusCodes turned into sample
 * quality. A bad StatusCode is stored as a Bad sample with a null value — the reading happened
 * and said "no valid value", which the balance engine must see.
 *
 * Reconnection: node-opcua's connection strategy handles a lost channel. If the session is
 * lost for good (server restarted, session closed), this connector tears the client down and
 * starts again with exponential back-off, re-creating session, subscription and items.
 *
 * OPC UA subscriptions have no per-notification acknowledgement toward the server that would
 * let us hold data there until it is committed (the Publish acknowledgement only releases the
 * server's retransmission queue, OPC 10000-4 §5.13.5), so samples between receipt and the next
 * flush (≤ INGEST_FLUSH_MS) are lost if ingest is killed; everything flushed is committed or
 * spooled.
 *
 * Read-back: a new subscription starts from the current value (its monitored items' queues are
 * the new subscription's, OPC 10000-4 §5.12.1.5, empty of what happened while nobody
 * subscribed), so the queue cannot give back a gap — after a takeover from a dead worker, or a
 * lost session. After each (re)connect the connector therefore reads the server's history from
 * the newest stored sample of each tag to now (HistoryRead with ReadRawModifiedDetails, OPC
 * 10000-11 §6.4.3, source timestamps) for each node whose Historizing attribute is true (OPC
 * 10000-3 §5.6.2); a node the server keeps no history for is counted in `readBack.notHistorizing`
 * and its gap stays. The subscription is created first, so history and live values overlap and
 * the samples primary key absorbs the overlap.
 */
export class OpcuaConnector implements Connector {
  readonly sourceId: number;
  private tags = new TagSet();
  private opts: OpcuaSourceOptions;
  private client: OPCUAClient | null = null;
  private session: ClientSession | null = null;
  private subscription: ClientSubscription | null = null;
  private items = new Map<number, { item: ClientMonitoredItem; address: string; interval: number }>();
  private state: ConnectionState = 'connecting';
  private lastError: string | null = null;
  private connectedAt: number | null = null;
  private lastMessageAt: number | null = null;
  private itemErrors = new Map<number, string>();
  private counters = { messages: 0, samples: 0, deadLetters: 0, suppressed: 0, reconnects: 0 };
  /** History read-back after (re)connects: values read, nodes without history, the last failure. */
  private readBackStats = { values: 0, notHistorizing: 0, error: null as string | null };
  private closing = false;
  private retryMs = 1_000;
  private retryTimer: NodeJS.Timeout | null = null;
  private run = 0;
  /** Of the client certificate presented (the one an integrator trusts). */
  private thumbprint: string | null = null;

  constructor(
    private source: SourceConfig,
    tags: readonly TagConfig[],
    private writer: BatchWriter,
    /** `db` holds the one client certificate (opcua-client.ts); `dataDir` this host's PKI folder. */
    private ctx: { dataDir: string; db: pg.Pool; log: Logger; lastStored?: (tagIds: number[]) => Promise<Map<number, Date>> },
  ) {
    this.sourceId = source.id;
    const { opts, error } = parseOpcuaOptions(source.options);
    this.opts = opts;
    this.lastError = error;
    this.tags.update(tags);
    void this.start();
  }

  private async start(): Promise<void> {
    const run = ++this.run;
    this.state = this.connectedAt ? 'reconnecting' : 'connecting';
    let client: OPCUAClient;
    try {
      const identity = await clientIdentity(this.ctx.db, this.ctx.dataDir);
      this.thumbprint = identity.thumbprint;
      client = await createClient(identity, this.opts, { clientName: `source-${this.source.id}`, mode: 'subscribe' });
    } catch (err) {
      // No certificate (database down on first use): retried with the usual back-off.
      return this.lost(`no client certificate: ${(err as Error).message}`, run);
    }
    if (run !== this.run) return;
    this.client = client;
    try {
      // The first connection is tried once here; our own back-off below repeats it.
      await client.connect(this.source.url);
      if (run !== this.run) return void client.disconnect().catch(() => {});
      const session = await client.createSession(await userIdentity(this.source));
      this.session = session;
      session.on('session_closed', () => this.lost('session closed by the server', run));
      client.on('connection_lost', () => {
        if (run === this.run) this.state = 'reconnecting';
      });
      client.on('connection_reestablished', () => {
        if (run === this.run) {
          this.state = 'connected';
          this.counters.reconnects++;
        }
      });
      const sub = ClientSubscription.create(session, {
        requestedPublishingInterval: this.opts.publishingInterval_ms,
        requestedLifetimeCount: 600,
        requestedMaxKeepAliveCount: 20,
        maxNotificationsPerPublish: 0,
        publishingEnabled: true,
        priority: 1,
      });
      this.subscription = sub;
      sub.on('terminated', () => this.lost('subscription terminated', run));
      this.items.clear();
      this.syncItems();
      this.state = 'connected';
      this.lastError = null;
      this.connectedAt = Date.now();
      this.retryMs = 1_000;
      this.ctx.log.info({ source: this.source.id, url: this.source.url, securityMode: this.opts.securityMode }, 'opcua connected');
      void this.readBack(session, run).catch((err: unknown) => {
        this.readBackStats.error = (err as Error).message;
        this.ctx.log.warn({ source: this.source.id, err: (err as Error).message }, 'history read-back failed; the gap stays');
      });
    } catch (err) {
      this.lost((err as Error).message, run);
    }
  }

  private lost(reason: string, run: number): void {
    if (this.closing || run !== this.run) return;
    this.lastError = reason;
    this.state = 'error';
    this.run++;
    const client = this.client;
    this.client = null;
    this.session = null;
    this.subscription = null;
    this.items.clear();
    void client?.disconnect().catch(() => {});
    if (this.retryTimer) clearTimeout(this.retryTimer);
    this.retryTimer = setTimeout(() => {
      this.retryTimer = null;
      this.counters.reconnects++;
      void this.start();
    }, this.retryMs);
    this.retryMs = Math.min(this.retryMs * 2, 30_000);
  }

  /** See the class comment: the gap since the newest stored sample, from the server's history. */
  private async readBack(session: ClientSession, run: number): Promise<void> {
    if (!this.ctx.lastStored) return;
    const tags = [...this.tags.all()].map((p) => p.tag);
    const last = await this.ctx.lastStored(tags.map((t) => t.id));
    const wanted = tags.filter((t) => last.has(t.id));
    if (!wanted.length || run !== this.run) return;
    const end = new Date();
    const historizing = await session.read(wanted.map((t) => ({ nodeId: t.address, attributeId: AttributeIds.Historizing })));
    for (const [i, t] of wanted.entries()) {
      if (historizing[i]?.value.value !== true) {
        this.readBackStats.notHistorizing++;
        continue;
      }
      let continuationPoint: Buffer | null = null;
      do {
        const r: HistoryReadResult = await session.readHistoryValue({ nodeId: t.address, ...(continuationPoint ? { continuationPoint } : {}) }, last.get(t.id)!, end, {
          numValuesPerNode: 1000,
          timestampsToReturn: TimestampsToReturn.Source,
        });
        if (run !== this.run) return;
        if (!r.statusCode.isGood()) throw new Error(`history read of ${t.address}: ${r.statusCode.toString()}`);
        const values = r.historyData instanceof HistoryData ? (r.historyData.dataValues ?? []) : [];
        for (const dv of values) this.onValue(t.id, dv);
        this.readBackStats.values += values.length;
        continuationPoint = r.continuationPoint?.length ? r.continuationPoint : null;
      } while (continuationPoint);
    }
    if (this.readBackStats.values) this.ctx.log.info({ source: this.source.id, values: this.readBackStats.values }, 'gap read back from the server’s history');
  }

  /** Brings the monitored items in line with the tag list (added, removed, changed interval or address). */
  private syncItems(): void {
    const sub = this.subscription;
    if (!sub) return;
    const wanted = new Map<number, TagConfig>();
    for (const p of this.tags.all()) wanted.set(p.tag.id, p.tag);
    for (const [id, cur] of this.items) {
      const t = wanted.get(id);
      if (!t || t.address !== cur.address || (t.samplingInterval_ms ?? this.opts.samplingInterval_ms) !== cur.interval) {
        void cur.item.terminate().catch(() => {});
        this.items.delete(id);
      }
    }
    for (const t of wanted.values()) {
      if (this.items.has(t.id)) continue;
      const interval = t.samplingInterval_ms ?? this.opts.samplingInterval_ms;
      // Enough queue for every sample of one publishing interval (OPC 10000-4 §5.12.1.5).
      const queueSize = Math.min(1000, Math.max(1, Math.ceil(this.opts.publishingInterval_ms / Math.max(interval, 1)) * 2));
      let item: ClientMonitoredItem;
      try {
        item = ClientMonitoredItem.create(
          sub,
          { nodeId: t.address, attributeId: AttributeIds.Value },
          // Trigger on a new source timestamp too (OPC 10000-4 §7.22.2, DataChangeTrigger
          // STATUS_VALUE_TIMESTAMP): a steady value the device keeps confirming is a fresh
          // sample, not a stale one.
          { samplingInterval: interval, discardOldest: true, queueSize, filter: new DataChangeFilter({ trigger: DataChangeTrigger.StatusValueTimestamp, deadbandType: DeadbandType.None }) },
          TimestampsToReturn.Both,
        );
      } catch (err) {
        this.itemErrors.set(t.id, (err as Error).message);
        continue;
      }
      item.on('changed', (dv: DataValue) => this.onValue(t.id, dv));
      item.on('err', (msg: string) => this.itemErrors.set(t.id, String(msg)));
      this.items.set(t.id, { item, address: t.address, interval });
    }
  }

  private onValue(tagId: number, dv: DataValue): void {
    const now = Date.now();
    this.lastMessageAt = now;
    this.counters.messages++;
    const proc = this.tags.get(tagId);
    if (!proc) return;
    if (dv.statusCode.value === StatusCodes.BadWaitingForInitialData.value) {
      // A server just started, with no reading from its data source yet (BadWaitingForInitialData,
      // OPC 10000-4's common StatusCodes): a state of the server, not a reading of the process. Stored,
      // it would stand as the tag's latest "no value" and blank the figures that read it until
      // the first reading arrives, although the reading before the restart is still the newest.
      this.counters.suppressed++;
      return;
    }
    const grade = gradeOfStatusCode(dv.statusCode.value);
    const ts = (dv.sourceTimestamp ?? dv.serverTimestamp)?.getTime() ?? now;
    // A dead letter's identity: the same value notified again (a resent notification, the
    // history read-back after a reconnect or a takeover) is counted on the stored letter.
    const delivery = () => opcuaDelivery(proc.tag.address, ts, dv.statusCode.value);
    let raw: number | null = null;
    if (grade !== 'bad') {
      const v = dv.value;
      const n = numericValue(DataType[v.dataType] ?? String(v.dataType), v.value, v.arrayType !== undefined && v.arrayType !== 0);
      if (typeof n !== 'number') {
        this.counters.deadLetters++;
        this.writer.enqueue([], [deadLetter(this.source.id, proc.tag.address, `${dv.toString().slice(0, 2000)}`, n.error, now, delivery())]);
        return;
      }
      raw = n;
    }
    const r = proc.process(raw, ts, grade, now);
    if (r === null) {
      this.counters.suppressed++;
    } else if (isSample(r)) {
      this.counters.samples++;
      this.writer.enqueue([r], []);
    } else {
      this.counters.deadLetters++;
      this.writer.enqueue([], [deadLetter(this.source.id, proc.tag.address, dv.toString().slice(0, 2000), r.reason, now, delivery())]);
    }
  }

  updateTags(tags: readonly TagConfig[]): void {
    if (this.tags.update(tags)) this.syncItems();
  }

  status(now: number): ConnectorStatus {
    return {
      ...sourceStatusBase(this.source, { state: this.state, lastError: this.lastError, connectedAt: this.connectedAt, lastMessageAt: this.lastMessageAt, tags: this.tags }, now),
      messages: this.counters.messages,
      samples: this.counters.samples,
      unmapped: 0,
      deadLetters: this.counters.deadLetters,
      suppressed: this.counters.suppressed,
      unacknowledged: 0,
      reconnects: this.counters.reconnects,
      details: {
        securityMode: this.opts.securityMode,
        securityPolicy: this.opts.securityPolicy,
        clientCertificateThumbprint: this.thumbprint,
        monitoredItems: this.items.size,
        readBack: { ...this.readBackStats },
        itemErrors: Object.fromEntries(this.itemErrors),
      },
    };
  }

  async close(): Promise<void> {
    this.closing = true;
    this.run++;
    this.state = 'disconnected';
    if (this.retryTimer) clearTimeout(this.retryTimer);
    const { subscription, session, client } = this;
    this.subscription = null;
    this.session = null;
    this.client = null;
    await subscription?.terminate().catch(() => {});
    await session?.close().catch(() => {});
    await client?.disconnect().catch(() => {});
  }
}
