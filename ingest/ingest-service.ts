import fs from 'node:fs/promises';
import path from 'node:path';
import pg from 'pg';
import type { Logger } from 'pino';
import { ingestPaths, type IngestConfig } from './config.ts';
import type { Connector, ConnectorStatus, SourceConfig } from './connector.ts';
import { MqttConnector } from './mqtt/mqtt-connector.ts';
import type { TagConfig } from './pipeline/types.ts';
import { loadWiring } from './source-repository.ts';
import { BatchWriter, type WriterStats } from './sink/batch-writer.ts';
import { SampleStore } from './sink/sample-store.ts';
import { Spool } from './sink/spool.ts';

/** Content of `<dataDir>/ingest-status.json`, rewritten every few seconds (atomically). */
export interface IngestStatus {
  pid: number;
  startedAt: string;
  heartbeatAt: string;
  /** Samples committed per second over the last status interval. */
  samplesPerSec: number;
  /** Receive → commit delay of the last flush [ms]. */
  lagMs: number;
  spool: { bytes: number; files: number };
  writer: WriterStats;
  sources: ConnectorStatus[];
  loadError: string | null;
}

const HOUR_MS = 3_600_000;

async function writeAtomic(file: string, text: string): Promise<void> {
  const tmp = `${file}.${process.pid}.tmp`;
  await fs.writeFile(tmp, text);
  await fs.rename(tmp, file);
}

function sourceKey(s: SourceConfig): string {
  return JSON.stringify([s.kind, s.name, s.url, s.username, s.secret, s.options]);
}

/**
 * The ingest process: loads enabled sources and tags, runs one connector per source, feeds the
 * batch writer, re-reads the wiring every few seconds (a changed source is reconnected, changed
 * tags are applied in place), keeps day partitions ahead and writes the status file.
 */
export class IngestService {
  private connectors = new Map<number, { key: string; c: Connector }>();
  private timers: NodeJS.Timeout[] = [];
  private startedAt = new Date();
  private lastCommitted = 0;
  private lastStatusAt = Date.now();
  private loadError: string | null = null;
  private reloading: Promise<void> | null = null;
  private stopped = false;

  private constructor(
    private cfg: IngestConfig,
    private log: Logger,
    private pool: pg.Pool,
    private store: SampleStore,
    private lanes: SampleStore[],
    readonly writer: BatchWriter,
  ) {}

  static async start(cfg: IngestConfig, log: Logger): Promise<IngestService> {
    const paths = ingestPaths(cfg.dataDir);
    await fs.mkdir(paths.discoveryDir, { recursive: true });
    const spool = await Spool.open(paths.spoolDir);
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
    await svc.reload();
    svc.timers.push(setInterval(() => void svc.reload(), cfg.reloadMs));
    svc.timers.push(setInterval(() => void svc.writeStatus(), cfg.statusMs));
    svc.timers.push(setInterval(() => void svc.maintain(), HOUR_MS));
    await svc.writeStatus();
    return svc;
  }

  private async maintain(): Promise<void> {
    try {
      const dropped = await this.store.maintainPartitions();
      if (dropped) this.log.info({ dropped }, 'dropped day partitions past retention');
    } catch (err) {
      this.log.warn({ err: (err as Error).message }, 'partition upkeep failed; will retry');
    }
  }

  /** Re-reads sources and tags; runs at most one at a time. */
  reload(): Promise<void> {
    this.reloading ??= this.doReload().finally(() => {
      this.reloading = null;
    });
    return this.reloading;
  }

  private async doReload(): Promise<void> {
    if (this.stopped) return;
    let snap;
    try {
      snap = await loadWiring(this.pool);
      this.loadError = null;
    } catch (err) {
      // Database down: keep running with the wiring we have.
      this.loadError = (err as Error).message;
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
        this.log.info({ source: id }, 'source removed or disabled');
      }
    }
  }

  private async create(s: SourceConfig, tags: TagConfig[]): Promise<Connector> {
    if (s.kind === 'mqtt') return new MqttConnector(s, tags, this.writer, { clientIdPrefix: this.cfg.mqttClientIdPrefix, log: this.log, trace: this.cfg.mqttTrace });
    // node-opcua is large (≈ 100 MB resident once loaded): only load it when a source needs it.
    const { OpcuaConnector } = await import('./opcua/opcua-connector.ts');
    return new OpcuaConnector(s, tags, this.writer, { pkiDir: ingestPaths(this.cfg.dataDir).pkiDir, log: this.log });
  }

  status(): IngestStatus {
    const now = Date.now();
    const committed = this.writer.stats.committedSamples;
    const dt = (now - this.lastStatusAt) / 1000;
    const rate = dt > 0 ? (committed - this.lastCommitted) / dt : 0;
    this.lastCommitted = committed;
    this.lastStatusAt = now;
    return {
      pid: process.pid,
      startedAt: this.startedAt.toISOString(),
      heartbeatAt: new Date(now).toISOString(),
      samplesPerSec: Math.round(rate),
      lagMs: this.writer.stats.lastLagMs,
      spool: { bytes: this.writer.spoolBytes, files: this.writer.spoolFiles },
      writer: { ...this.writer.stats },
      sources: [...this.connectors.values()].map((x) => x.c.status(now)),
      loadError: this.loadError,
    };
  }

  private async writeStatus(): Promise<void> {
    const paths = ingestPaths(this.cfg.dataDir);
    try {
      await writeAtomic(paths.statusFile, JSON.stringify(this.status(), null, 2));
      for (const [id, { c }] of this.connectors) {
        if (c instanceof MqttConnector) await writeAtomic(path.join(paths.discoveryDir, `source-${id}.json`), JSON.stringify(c.discovery()));
      }
    } catch (err) {
      this.log.warn({ err: (err as Error).message }, 'status file not written');
    }
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
    await this.writeStatus();
    this.connectors.clear();
    await this.store.close();
    for (const l of this.lanes) await l.close();
    await this.pool.end().catch(() => {});
  }
}
