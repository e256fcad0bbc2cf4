import { EventEmitter } from 'node:events';
import pg from 'pg';
import type { Logger } from 'pino';
import { INGEST_CHANNEL, parseIngestEvent } from '../shared/contracts/ingest-events.ts';
import type { IngestWorkerStatus } from '../shared/contracts/wiring.ts';
import { ingestPaths, type IngestConfig } from './config.ts';
import type { Connector, ConnectorStatus, SourceConfig } from './connector.ts';
import { Discovery, pruneDiscovery, saveDiscovery } from './mqtt/discovery.ts';
import { MqttConnector } from './mqtt/mqtt-connector.ts';
import type { TagConfig } from './pipeline/types.ts';
import { PgListener } from './pg-listener.ts';
import { loadWiring } from './source-repository.ts';
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

/** Why the wiring was re-read: at start, a NOTIFY from the database, the fallback timer, a LISTEN (re)connect. */
export type ReloadReason = 'start' | 'notify' | 'poll' | 'listen';

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
  private connectors = new Map<number, { key: string; c: Connector }>();
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
    svc.timers.push(setInterval(() => void svc.heartbeat(), cfg.statusMs));
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
    let snap;
    try {
      snap = await loadWiring(this.pool);
      this.loadError = null;
    } catch (err) {
      // Database down: keep running with the wiring we have.
      this.loadError = (err as Error).message;
      this.events.emit('reloaded', { reason, sources: this.connectors.size, tags: 0, error: this.loadError });
      return;
    }
    const seen = new Set<number>();
    for (const s of snap.sources) {
      seen.add(s.id);
      const tags = snap.tagsBySource.get(s.id) ?? [];
      const key = sourceKey(s);
      const cur = this.connectors.get(s.id);
      if (cur && cur.key === key) {
        cur.c.updateTags(tags);
        continue;
      }
      if (cur) await cur.c.close();
      this.connectors.set(s.id, { key, c: await this.create(s, tags) });
      this.log.info({ source: s.id, kind: s.kind, tags: tags.length }, cur ? 'source changed; reconnecting' : 'source started');
    }
    for (const [id, cur] of this.connectors) {
      if (!seen.has(id)) {
        await cur.c.close();
        this.connectors.delete(id);
        this.discoveries.delete(id);
        this.log.info({ source: id }, 'source removed or disabled');
      }
    }
    let tags = 0;
    for (const list of snap.tagsBySource.values()) tags += list.length;
    this.log.debug({ reason, sources: snap.sources.length, tags }, 'wiring re-read');
    this.events.emit('reloaded', { reason, sources: snap.sources.length, tags, error: null });
  }

  private async create(s: SourceConfig, tags: TagConfig[]): Promise<Connector> {
    if (s.kind === 'mqtt') {
      // A reconnected source keeps what it saw: the topics are the broker's, not the connection's.
      let discovery = this.discoveries.get(s.id);
      if (!discovery) this.discoveries.set(s.id, (discovery = new Discovery()));
      return new MqttConnector(s, tags, this.writer, { clientIdPrefix: this.cfg.mqttClientIdPrefix, log: this.log, trace: this.cfg.mqttTrace, discovery, acks: this.cfg.mqttAcks });
    }
    // node-opcua is large (≈ 100 MB resident once loaded): only load it when a source needs it.
    const { OpcuaConnector } = await import('./opcua/opcua-connector.ts');
    return new OpcuaConnector(s, tags, this.writer, { dataDir: this.cfg.dataDir, db: this.pool, log: this.log });
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
    await this.reloading;
    // Connectors first, so nothing new arrives during the final flush. Held MQTT acks of
    // messages committed after the disconnect are dropped; the broker redelivers those and
    // the primary key makes the copy a no-op.
    await this.writer.flush();
    await Promise.all([...this.connectors.values()].map((x) => x.c.close()));
    await this.writer.close();
    await this.listener?.close();
    await this.beating;
    await this.heartbeat(true);
    this.connectors.clear();
    await this.store.close();
    for (const l of this.lanes) await l.close();
    await this.pool.end().catch(() => {});
  }
}
