import { EventEmitter } from 'node:events';
import pg from 'pg';
import type { Logger } from 'pino';
import { INGEST_CHANNEL, parseIngestEvent } from '../shared/contracts/ingest-events.ts';
import type { IngestWorkerStatus } from '../shared/contracts/wiring.ts';
import { ingestPaths, type IngestConfig } from './config.ts';
import type { Connector, ConnectorStatus, SourceConfig } from './connector.ts';
import { Discovery, pruneDiscovery, saveDiscovery } from './mqtt/discovery.ts';
import { mqttOptionsOf, testMqttConnection } from './mqtt/mqtt-connection.ts';
import { MqttConnector } from './mqtt/mqtt-connector.ts';
import type { TagConfig } from './pipeline/types.ts';
import { PgListener } from './pg-listener.ts';
import { LEASE_HEARTBEATS, SourceLeases } from './source-leases.ts';
import { lastStoredTimes, loadWiring, type WiringSnapshot } from './source-repository.ts';
import { BatchWriter, type WriterStats } from './sink/batch-writer.ts';
import { SampleStore } from './sink/sample-store.ts';
import { Spool } from './sink/spool.ts';
import { WorkerRegistry } from './worker-registry.ts';

/**
 * What this worker reports with each heartbeat (`ingest_workers.status`); the API reads it
 * with `ingestWorkerStatus` (shared/contracts/wiring.ts).
 */
export interface IngestStatus extends Omit<IngestWorkerStatus, 'writer' | 'sources'> {
  writer: WriterStats;
  sources: ConnectorStatus[];
}

/**
 * Why the wiring was re-read: at start, a NOTIFY from the database, the fallback timer, a LISTEN
 * (re)connect; `lease`: not re-read, the leases renewed and taken with the heartbeat (or when
 * another worker's lease runs out).
 */
export type ReloadReason = 'start' | 'notify' | 'poll' | 'listen' | 'lease';

/**
 * How a source runs when several workers share the database (server/db/schema/ingest.ts
 * `source_leases`): `lease` on the one worker holding the source's lease (OPC UA; MQTT on a 3.1.1
 * broker or without a shared group), `shared` on every worker as one MQTT 5 shared subscription.
 */
export type RunMode = 'lease' | 'shared';

/** MQTT 5.0 §4.8.2: a shared subscription's filter is `$share/<ShareName>/<filter>`. */
export function sharedFilters(group: string, topics: readonly string[]): string[] {
  return topics.map((t) => `$share/${group}/${t}`);
}

/** Events of `IngestService.events`. */
export interface IngestServiceEvents {
  /** A re-read of the wiring finished (or found the database down: `error`). */
  reloaded: [{ reason: ReloadReason; sources: number; tags: number; error: string | null }];
  /** A heartbeat row was written (`error` when it could not be). */
  heartbeat: [{ error: string | null }];
}

const HOUR_MS = 3_600_000;
/** MQTT topics unseen for this long leave the discovery list [days]. */
const DISCOVERY_KEEP_DAYS = 7;

function sourceKey(s: SourceConfig): string {
  return JSON.stringify([s.kind, s.name, s.url, s.username, s.secret, s.options]);
}

/**
 * The ingest process: loads enabled sources and tags, runs one connector per source, feeds the
 * batch writer, re-reads the wiring when the database announces a change (and on a slow
 * fallback timer; a changed source is reconnected, changed tags are applied in place), keeps
 * day partitions ahead, and writes its heartbeat row and the MQTT topics it saw. Everything it
 * shares with the API is in PostgreSQL, so it can run on any host.
 */
export class IngestService {
  readonly events = new EventEmitter<IngestServiceEvents>();
  private connectors = new Map<number, { key: string; mode: RunMode; c: Connector; sessionId?: string }>();
  /** Dead workers' MQTT 5 shared sessions this worker resumed to take their messages, by client identifier. */
  private drains = new Map<string, { sourceId: number; c: MqttConnector; messages: number; quietBeats: number }>();
  /** The protocol level a probe found per MQTT source with protocolVersion auto (by source key). */
  private protocols = new Map<string, 4 | 5>();
  private probing = new Set<string>();
  private snap: WiringSnapshot | null = null;
  private leaseTimer: NodeJS.Timeout | null = null;
  readonly leases: SourceLeases;
  private discoveries = new Map<number, Discovery>();
  private timers: NodeJS.Timeout[] = [];
  private lastCommitted = 0;
  private lastBeatAt = Date.now();
  private rate = 0;
  private loadError: string | null = null;
  private reloading: Promise<void> | null = null;
  /** A reload was asked for while one ran: run once more after it (the change may have committed after its query). */
  private reloadAgain: ReloadReason | null = null;
  private beating: Promise<void> | null = null;
  private listener: PgListener | null = null;
  private stopped = false;
  readonly registry: WorkerRegistry;

  private constructor(
    private cfg: IngestConfig,
    private log: Logger,
    private pool: pg.Pool,
    private store: SampleStore,
    private lanes: SampleStore[],
    readonly writer: BatchWriter,
  ) {
    this.registry = new WorkerRegistry(pool, new Date(), cfg.statusMs);
    this.leases = new SourceLeases(pool, this.registry.id, LEASE_HEARTBEATS * cfg.statusMs);
  }

  static async start(cfg: IngestConfig, log: Logger): Promise<IngestService> {
    const paths = ingestPaths(cfg.dataDir);
    const spool = await Spool.open(paths.spoolDir, { fileBytes: cfg.spoolFileBytes, maxBytes: cfg.spoolMaxBytes });
    if (!spool.isEmpty) log.info({ files: spool.fileCount, bytes: spool.sizeBytes }, 'spool from a previous run will be replayed');
    // Partition upkeep has a connection of its own: on a writer's it could land inside a batch's transaction.
    const store = new SampleStore(cfg.databaseUrl, { retentionDays: cfg.retentionDays });
    const lanes = Array.from({ length: cfg.writers }, () => new SampleStore(cfg.databaseUrl, { retentionDays: cfg.retentionDays }));
    const writer = new BatchWriter(lanes, spool, { batchRows: cfg.batchRows, flushMs: cfg.flushMs, log, ...(cfg.maxBacklog ? { maxBacklog: cfg.maxBacklog } : {}) });
    const pool = new pg.Pool({ connectionString: cfg.databaseUrl, max: 2, connectionTimeoutMillis: 5_000, application_name: 'flocstream-ingest-config' });
    pool.on('error', () => {});
    const svc = new IngestService(cfg, log, pool, store, lanes, writer);
    // Replay what a previous run spooled before any new traffic is accepted.
    await writer.flush();
    await svc.maintain();
    await svc.reload('start');
    svc.listener = new PgListener(
      cfg.databaseUrl,
      INGEST_CHANNEL,
      (payload) => {
        if (parseIngestEvent(payload)?.event === 'wiring') void svc.reload('notify');
      },
      // Changes committed while nobody listened were not announced: re-read once listening.
      () => void svc.reload('listen'),
      log,
    );
    svc.timers.push(setInterval(() => void svc.reload('poll'), cfg.reloadMs));
    // Leases are renewed (and free ones taken) with every heartbeat, first: the heartbeat's
    // discovery upsert can be slow under load, and a late renewal hands a live source away.
    svc.timers.push(setInterval(() => void svc.reload('lease').then(() => svc.heartbeat()), cfg.statusMs));
    svc.timers.push(setInterval(() => void svc.maintain(), HOUR_MS));
    await svc.heartbeat();
    return svc;
  }

  private async maintain(): Promise<void> {
    try {
      const dropped = await this.store.maintainPartitions();
      if (dropped) this.log.info({ dropped }, 'dropped day partitions past retention');
      const workers = await this.registry.pruneSilent();
      const topics = await pruneDiscovery(this.pool, DISCOVERY_KEEP_DAYS);
      if (workers || topics) this.log.info({ workers, topics }, 'forgot silent ingest workers and MQTT topics');
    } catch (err) {
      this.log.warn({ err: (err as Error).message }, 'partition upkeep failed; will retry');
    }
  }

  /**
   * Re-reads sources and tags; runs at most one at a time, and once more after the running one
   * when asked again meanwhile. Emits `reloaded` when done.
   */
  reload(reason: ReloadReason): Promise<void> {
    if (this.reloading) {
      this.reloadAgain = reason;
      return this.reloading;
    }
    this.reloading = (async () => {
      let next: ReloadReason | null = reason;
      while (next) {
        this.reloadAgain = null;
        await this.doReload(next);
        next = this.reloadAgain;
      }
    })().finally(() => {
      this.reloading = null;
    });
    return this.reloading;
  }

  private async doReload(reason: ReloadReason): Promise<void> {
    if (this.stopped) return;
    if (reason !== 'lease' || !this.snap) {
      try {
        this.snap = await loadWiring(this.pool);
        this.loadError = null;
      } catch (err) {
        // Database down: keep running with the wiring we have.
        this.loadError = (err as Error).message;
        this.events.emit('reloaded', { reason, sources: this.connectors.size, tags: 0, error: this.loadError });
        return;
      }
    }
    const snap = this.snap;
    // Loading node-opcua takes seconds on a busy machine: done before any lease is taken, so a
    // lease never runs out between its take and the connector's start.
    if (snap.sources.some((s) => s.kind === 'opcua')) await import('./opcua/opcua-connector.ts');
    const seen = new Set<number>();
    let error: string | null = null;
    for (const s of snap.sources) {
      seen.add(s.id);
      try {
        await this.arbitrate(s, snap.tagsBySource.get(s.id) ?? []);
      } catch (err) {
        // Database down (lease not renewed or taken): nothing changes until it answers again.
        error = (err as Error).message;
      }
    }
    for (const [id, cur] of this.connectors) {
      if (!seen.has(id)) {
        await this.stopSource(id, 'source removed or disabled');
        if (cur.mode === 'lease') await this.leases.release(id).catch(() => {});
        else if (cur.sessionId) await this.leases.release(id, cur.sessionId).catch(() => {});
      }
    }
    await this.adoptOrphans(snap).catch((err: unknown) => (error ??= (err as Error).message));
    let tags = 0;
    for (const list of snap.tagsBySource.values()) tags += list.length;
    this.log.debug({ reason, sources: snap.sources.length, tags }, 'wiring re-read');
    this.events.emit('reloaded', { reason, sources: snap.sources.length, tags, error });
  }

  /**
   * Whether this worker runs source `s`, and how: a lease-mode source starts once its lease is
   * taken and stops when a renewal finds it lost (another worker took it after it expired); a
   * shared one always runs, with this worker's own session, whose lease only says who may resume
   * it if this worker dies. A changed source is reconnected, changed tags applied in place.
   */
  private async arbitrate(s: SourceConfig, tags: TagConfig[]): Promise<void> {
    const key = sourceKey(s);
    const cur = this.connectors.get(s.id);
    const mode = this.modeOf(s, key);
    if (mode === null) return;
    let mine: boolean;
    let sessionId: string | undefined;
    if (mode === 'lease') {
      const lease = await this.leases.take(s.id);
      mine = lease.held;
      // Another worker holds it: try again the moment its lease runs out, not a heartbeat later.
      if (!mine && lease.expiresIn_ms !== null && lease.expiresIn_ms < this.cfg.statusMs) this.retryLeaseIn(lease.expiresIn_ms);
    } else {
      sessionId = this.sharedClientId(s);
      // Our own session: renewed while we live, so nobody resumes it under us.
      mine = (await this.leases.take(s.id, sessionId)).held;
    }
    if (cur && cur.key === key && cur.mode === mode && mine) {
      cur.c.updateTags(tags);
      return;
    }
    if (cur) await this.stopSource(s.id, !mine ? 'lease lost to another worker; standing by' : 'source changed; reconnecting');
    if (!mine) return;
    this.connectors.set(s.id, { key, mode, c: await this.create(s, tags, sessionId), ...(sessionId ? { sessionId } : {}) });
    this.log.info({ source: s.id, kind: s.kind, tags: tags.length, mode, ...(sessionId ? { clientId: sessionId } : {}) }, cur ? 'source restarted' : 'source started');
  }

  private async stopSource(id: number, why: string): Promise<void> {
    const cur = this.connectors.get(id);
    if (!cur) return;
    this.connectors.delete(id);
    await cur.c.close();
    if (why !== 'source changed; reconnecting') this.discoveries.delete(id);
    this.log.info({ source: id }, why);
  }

  private retryLeaseIn(ms: number): void {
    if (this.leaseTimer) return;
    this.leaseTimer = setTimeout(
      () => {
        this.leaseTimer = null;
        void this.reload('lease');
      },
      Math.max(0, ms) + 20,
    );
  }

  /**
   * An MQTT source runs shared on an MQTT 5 broker when it has a shared group; with
   * protocolVersion auto the broker is asked once (a throwaway connection, as the API's
   * connection test does). Null while that is not known: the probe runs in the background (an
   * unreachable broker must not hold up the renewal of other sources' leases) and a re-run
   * follows its answer; a failed probe is tried again with the next heartbeat.
   */
  private modeOf(s: SourceConfig, key: string): RunMode | null {
    if (s.kind !== 'mqtt') return 'lease';
    const o = mqttOptionsOf(s).options;
    if (o.sharedGroup === null || o.protocolVersion === 4) return 'lease';
    if (o.protocolVersion === 5) return 'shared';
    const level = this.protocols.get(key);
    if (level !== undefined) return level === 5 ? 'shared' : 'lease';
    if (!this.probing.has(key)) {
      this.probing.add(key);
      void testMqttConnection(s, 5_000)
        .then((probe) => {
          if (!probe.ok) return this.log.warn({ source: s.id, err: probe.error }, 'MQTT broker not reachable; its protocol level decides how workers share the source, trying again');
          this.protocols.set(key, probe.details?.protocolVersion === '5.0' ? 5 : 4);
          void this.reload('lease');
        })
        .finally(() => this.probing.delete(key));
    }
    return null;
  }

  /** This worker's client identifier in a shared subscription: one persistent session per worker. */
  private sharedClientId(s: SourceConfig): string {
    const base = mqttOptionsOf(s).options.clientId ?? `${this.cfg.mqttClientIdPrefix}-${s.id}`;
    return `${base}-w${this.registry.id.slice(0, 8)}`;
  }

  /**
   * A dead worker's MQTT 5 session keeps its share of a shared subscription: the broker goes on
   * queueing messages for it and, when the session expires, drops them (MQTT 5.0 §4.8.2 only says
   * it SHOULD send them to another subscriber; mosquitto 2.0 does not — measured in
   * tests/integration/ingest/scale-out.test.ts). So a worker that finds such a session (its lease
   * expired) takes the lease, resumes the session with its client identifier (Clean Start 0),
   * unsubscribes it from the shared filters so no new messages join it, stores and acknowledges
   * what the broker resends, and once a heartbeat passes with nothing held and nothing new, ends
   * the session (Session Expiry 0 on DISCONNECT) and deletes the lease.
   */
  private async adoptOrphans(snap: WiringSnapshot): Promise<void> {
    for (const [clientId, d] of this.drains) {
      const st = d.c.status(Date.now());
      const quiet = d.c.idle && st.messages === d.messages;
      d.messages = st.messages;
      d.quietBeats = quiet ? d.quietBeats + 1 : 0;
      if (d.quietBeats < 2) {
        await this.leases.take(d.sourceId, clientId);
        continue;
      }
      this.drains.delete(clientId);
      await d.c.close(true);
      await this.leases.release(d.sourceId, clientId);
      this.log.info({ source: d.sourceId, clientId, messages: st.messages, samples: st.samples }, 'dead worker’s shared session drained and ended');
    }
    const shared = [...this.connectors.values()].filter((x) => x.mode === 'shared').map((x) => x.c.sourceId);
    for (const o of await this.leases.orphanedSessions(shared)) {
      if (this.drains.has(o.mqttClientId)) continue;
      const s = snap.sources.find((x) => x.id === o.sourceId);
      if (!s || !(await this.leases.take(o.sourceId, o.mqttClientId)).held) continue;
      const group = mqttOptionsOf(s).options.sharedGroup!;
      const c = new MqttConnector(s, snap.tagsBySource.get(s.id) ?? [], this.writer, {
        clientIdPrefix: this.cfg.mqttClientIdPrefix,
        log: this.log,
        trace: this.cfg.mqttTrace,
        acks: this.cfg.mqttAcks,
        session: { clientId: o.mqttClientId, filters: sharedFilters(group, mqttOptionsOf(s).options.topics), drain: true },
      });
      this.drains.set(o.mqttClientId, { sourceId: s.id, c, messages: 0, quietBeats: 0 });
      this.log.info({ source: s.id, clientId: o.mqttClientId }, 'resuming a dead worker’s shared session to take its messages');
    }
  }

  private async create(s: SourceConfig, tags: TagConfig[], sharedClientId?: string): Promise<Connector> {
    if (s.kind === 'mqtt') {
      // A reconnected source keeps what it saw: the topics are the broker's, not the connection's.
      let discovery = this.discoveries.get(s.id);
      if (!discovery) this.discoveries.set(s.id, (discovery = new Discovery()));
      const o = mqttOptionsOf(s).options;
      const session = sharedClientId ? { session: { clientId: sharedClientId, filters: sharedFilters(o.sharedGroup!, o.topics), drain: false } } : {};
      return new MqttConnector(s, tags, this.writer, { clientIdPrefix: this.cfg.mqttClientIdPrefix, log: this.log, trace: this.cfg.mqttTrace, discovery, acks: this.cfg.mqttAcks, ...session });
    }
    // node-opcua is large (≈ 100 MB resident once loaded): only load it when a source needs it.
    const { OpcuaConnector } = await import('./opcua/opcua-connector.ts');
    // A source taken over from another worker resumes after what is stored (history read).
    return new OpcuaConnector(s, tags, this.writer, { dataDir: this.cfg.dataDir, db: this.pool, log: this.log, lastStored: (tagIds) => lastStoredTimes(this.pool, tagIds) });
  }

  /** This worker's figures now; `samplesPerSec` is the rate over the last heartbeat period. */
  status(): IngestStatus {
    const now = Date.now();
    return {
      samplesPerSec: Math.round(this.rate),
      lagMs: this.writer.stats.lastLagMs,
      spool: this.writer.spoolStatus,
      writer: { ...this.writer.stats },
      sources: [...this.connectors.values()].map((x) => x.c.status(now)),
      loadError: this.loadError,
    };
  }

  /**
   * Writes the heartbeat row and saves the MQTT topics seen since the last beat; one at a time
   * (with the database down a beat waits for its connection and the next one is skipped).
   */
  heartbeat(stopped = false): Promise<void> {
    this.beating ??= this.beat(stopped).finally(() => {
      this.beating = null;
    });
    return this.beating;
  }

  private async beat(stopped: boolean): Promise<void> {
    const now = Date.now();
    const committed = this.writer.stats.committedSamples;
    const dt = (now - this.lastBeatAt) / 1000;
    if (dt > 0) this.rate = (committed - this.lastCommitted) / dt;
    this.lastCommitted = committed;
    this.lastBeatAt = now;
    let error: string | null = null;
    for (const [sourceId, d] of this.discoveries) {
      const deltas = d.drain();
      try {
        const newTopics = await saveDiscovery(this.pool, sourceId, deltas);
        if (newTopics) await this.registry.notify({ event: 'discovery', workerId: this.registry.id, sourceId, newTopics });
      } catch (err) {
        d.restore(deltas);
        error = (err as Error).message;
      }
    }
    try {
      await this.registry.beat(this.status(), stopped);
    } catch (err) {
      error = (err as Error).message;
    }
    if (error) this.log.warn({ err: error }, 'heartbeat not written; will retry');
    this.events.emit('heartbeat', { error });
  }

  /** Stops receiving, flushes everything pending (commit or spool), writes a last status. */
  async stop(): Promise<void> {
    if (this.stopped) return;
    this.stopped = true;
    for (const t of this.timers) clearInterval(t);
    if (this.leaseTimer) clearTimeout(this.leaseTimer);
    await this.reloading;
    // Connectors first, so nothing new arrives during the final flush. Held MQTT acks of
    // messages committed after the disconnect are dropped; the broker redelivers those and
    // the primary key makes the copy a no-op.
    await this.writer.flush();
    await Promise.all([...this.connectors.values()].map((x) => x.c.close()));
    await Promise.all([...this.drains.values()].map((d) => d.c.close()));
    await this.writer.close();
    // Leases go at once, so another worker takes over without waiting for them to expire. A
    // shared session is kept at the broker (its queued messages with it) and its lease ended, so
    // a live worker resumes it and takes those messages (adoptOrphans).
    for (const [id, x] of this.connectors) {
      if (x.mode === 'lease') await this.leases.release(id).catch(() => {});
      else if (x.sessionId) await this.leases.expire(id, x.sessionId).catch(() => {});
    }
    for (const [clientId, d] of this.drains) await this.leases.expire(d.sourceId, clientId).catch(() => {});
    await this.listener?.close();
    await this.beating;
    await this.heartbeat(true);
    this.connectors.clear();
    await this.store.close();
    for (const l of this.lanes) await l.close();
    await this.pool.end().catch(() => {});
  }
}
