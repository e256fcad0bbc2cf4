import path from 'node:path';
import { z } from 'zod';

/**
 * The only place in ingest/ that reads process.env (house rule 8). Ingest needs DATABASE_URL
 * (and the brokers and endpoints named in the `sources` table); FLOCSTREAM_DATA_DIR is a folder
 * of its own host for the spool, the log and the OPC UA PKI, so ingest can run on any host that
 * reaches PostgreSQL and the brokers. Everything else has a default.
 */
const positiveInt = z.coerce.number().int().positive();

/**
 * Default batch size. Each batch also upserts one rollup_1m row per (tag, minute), one rollup_1h
 * row per (tag, hour) and one tag_latest row per tag it holds, so the per-row cost falls as the
 * batch grows; 50 000 kept the writer at or above 0.8 × `psql \copy` in tests/bench/ingest.bench.ts,
 * 20 000 did not. At ordinary rates the time limit below flushes long before the size does.
 */
export const DEFAULT_BATCH_ROWS = 50_000;

/**
 * Node options the ingest process is started with (scripts/start.ts, the benchmark). V8 sizes
 * its heap by the machine's memory (GBs here), so short-lived objects that survive a scavenge —
 * samples and held acks live a few hundred ms — piled up in old space until a late full
 * collection: peak RSS 260–310 MB in tests/bench/ingest.bench.ts. A 256 MB old-space limit makes
 * V8 collect sooner (peak about 200 MB, same throughput) and is far above what ingest keeps
 * alive, which backpressure bounds (BatchWriter maxBacklog).
 */
export const INGEST_NODE_ARGS: readonly string[] = ['--max-old-space-size=256'];
const envSchema = z.object({
  DATABASE_URL: z.url(),
  FLOCSTREAM_DATA_DIR: z.string().default('.data'),
  LOG_LEVEL: z.enum(['fatal', 'error', 'warn', 'info', 'debug', 'trace', 'silent']).default('info'),
  /** Flush a batch once it holds this many samples … */
  INGEST_BATCH_ROWS: positiveInt.default(DEFAULT_BATCH_ROWS),
  /** … or once its oldest sample has waited this long [ms]. */
  INGEST_FLUSH_MS: positiveInt.default(200),
  /**
   * Database connections the batch writer commits on. Two let one batch's COPY run while the
   * previous one finishes its rollups and commit (tests/bench/ingest.bench.ts); acknowledgements
   * stay in arrival order whatever the count.
   */
  INGEST_WRITERS: z.coerce.number().int().min(1).max(8).default(2),
  /**
   * Backpressure: sources pause while this many samples are received but not yet committed or
   * spooled, and resume at half of it; default four batches.
   */
  INGEST_MAX_BACKLOG_ROWS: positiveInt.optional(),
  /** Day partitions ending before now − retention are dropped [days]. */
  INGEST_RETENTION_DAYS: positiveInt.default(400),
  /**
   * Fallback re-read of sources and tags [ms]. A change announces itself on `flocstream_ingest`
   * (a trigger, migration 0005) and is applied at once; this timer only covers changes that
   * committed while the LISTEN connection was down.
   */
  INGEST_RELOAD_MS: positiveInt.default(30_000),
  /** Heartbeat: how often this worker's `ingest_workers` row and the MQTT discovery are written [ms]. */
  INGEST_STATUS_MS: positiveInt.default(2_000),
  /** MQTT client identifier prefix; the source id is appended so each session is stable across restarts. */
  INGEST_MQTT_CLIENT_ID: z.string().min(1).max(16).default('flocstream-ingest'),
  /**
   * How MQTT PUBACKs leave after the commit (ingest/mqtt/mqtt-connector.ts AckMode): `serial` is
   * mqtt.js's stock way, one message per commit, for `npm run bench:ingest -- --stock` only.
   */
  INGEST_MQTT_ACKS: z.enum(['pipelined', 'serial']).default('pipelined'),
  /** The `debug` package's namespaces; mqtt.js traces each packet only when it names `mqttjs`. */
  DEBUG: z.string().optional(),
  /** A new spool file is started once the current one holds this many bytes (default 64 MiB). */
  INGEST_SPOOL_FILE_BYTES: positiveInt.optional(),
  /**
   * Spool size cap [bytes] (default 2 GiB): at the cap the writer holds its batch
   * unacknowledged and sources pause (the broker keeps the rest); status shows `capReached`.
   */
  INGEST_SPOOL_MAX_BYTES: positiveInt.optional(),
});

export interface IngestConfig {
  databaseUrl: string;
  dataDir: string;
  logLevel: z.infer<typeof envSchema>['LOG_LEVEL'];
  batchRows: number;
  writers: number;
  /** Undefined: four batches. */
  maxBacklog?: number;
  flushMs: number;
  retentionDays: number;
  reloadMs: number;
  statusMs: number;
  mqttClientIdPrefix: string;
  /** mqtt.js's per-packet trace through `debug` (DEBUG=mqttjs*); off, it costs nothing per packet. */
  mqttTrace: boolean;
  /** Undefined: pipelined (the product's); `serial` only for the benchmark's stock reference. */
  mqttAcks?: 'pipelined' | 'serial';
  /** Undefined: the spool's defaults (ingest/sink/spool.ts). */
  spoolFileBytes?: number;
  spoolMaxBytes?: number;
}

export class IngestConfigError extends Error {}

export function loadIngestConfig(env: NodeJS.ProcessEnv = process.env): IngestConfig {
  const parsed = envSchema.safeParse(env);
  if (!parsed.success) {
    const lines = parsed.error.issues.map((i) => `  ${i.path.join('.')}: ${i.message}`);
    throw new IngestConfigError(`invalid ingest environment:\n${lines.join('\n')}`);
  }
  const e = parsed.data;
  return {
    databaseUrl: e.DATABASE_URL,
    dataDir: path.resolve(e.FLOCSTREAM_DATA_DIR),
    logLevel: e.LOG_LEVEL,
    batchRows: e.INGEST_BATCH_ROWS,
    writers: e.INGEST_WRITERS,
    ...(e.INGEST_MAX_BACKLOG_ROWS ? { maxBacklog: e.INGEST_MAX_BACKLOG_ROWS } : {}),
    flushMs: e.INGEST_FLUSH_MS,
    retentionDays: e.INGEST_RETENTION_DAYS,
    reloadMs: e.INGEST_RELOAD_MS,
    statusMs: e.INGEST_STATUS_MS,
    mqttClientIdPrefix: e.INGEST_MQTT_CLIENT_ID,
    mqttTrace: /mqttjs/.test(e.DEBUG ?? ''),
    ...(e.INGEST_MQTT_ACKS === 'serial' ? { mqttAcks: 'serial' as const } : {}),
    ...(e.INGEST_SPOOL_FILE_BYTES ? { spoolFileBytes: e.INGEST_SPOOL_FILE_BYTES } : {}),
    ...(e.INGEST_SPOOL_MAX_BYTES ? { spoolMaxBytes: e.INGEST_SPOOL_MAX_BYTES } : {}),
  };
}

/**
 * Where ingest keeps its local files under the data folder: none of them is read by another
 * process (status and discovery are rows in PostgreSQL).
 */
export function ingestPaths(dataDir: string) {
  return {
    spoolDir: path.join(dataDir, 'spool'),
    logsDir: path.join(dataDir, 'logs'),
  };
}
