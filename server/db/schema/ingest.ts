import { sql } from 'drizzle-orm';
import { bigint, check, index, integer, jsonb, pgTable, primaryKey, smallint, text, timestamp } from 'drizzle-orm/pg-core';
import { sources } from './wiring.ts';

/**
 * One row per ingest process (worker), on whatever host it runs: written at start, rewritten by
 * its heartbeat every INGEST_STATUS_MS, marked `stopped_at` on a clean stop. The API reads these
 * rows for `GET /api/v1/ingest/status` (a worker runs while its heartbeat is younger than three
 * periods); nothing else passes between ingest and the API except these tables and NOTIFY on
 * `flocstream_ingest`. Rows of workers silent for a day are pruned by any running worker.
 */
export const ingestWorkers = pgTable(
  'ingest_workers',
  {
    /** Chosen by the worker at start (a random UUID): unique across hosts and restarts. */
    id: text('id').primaryKey(),
    host: text('host').notNull(),
    pid: integer('pid').notNull(),
    startedAt: timestamp('started_at', { withTimezone: true }).notNull(),
    /** The database's now() at the last heartbeat, so ages compare clocks of one machine only. */
    heartbeatAt: timestamp('heartbeat_at', { withTimezone: true }).notNull(),
    /** The worker's heartbeat period [ms]; the API judges staleness against three of them. */
    heartbeat_ms: integer('heartbeat_ms').notNull(),
    /** Set by a clean stop; null while running or after a crash. */
    stoppedAt: timestamp('stopped_at', { withTimezone: true }),
    /** Counters and per-source state (`ingestWorkerStatus` in shared/contracts/wiring.ts). */
    status: jsonb('status').notNull(),
  },
  (t) => [index('ingest_workers_heartbeat_idx').on(t.heartbeatAt)],
);

/**
 * Which ingest worker holds what, so several workers share the sources (ingest/source-leases.ts).
 * `mqtt_client_id` '' is the source itself: an OPC UA source, or an MQTT source on an MQTT 3.1.1
 * broker, runs on the one worker that holds it. A non-empty `mqtt_client_id` is one worker's
 * persistent session in an MQTT 5 shared subscription (MQTT 5.0 §4.8.2): every worker runs the
 * source, and the lease says who may resume that session when its worker has died, so the
 * messages the broker queued for it are not lost. `holder` is an `ingest_workers.id`;
 * `expires_at` is the database's now() plus three heartbeats, renewed with each heartbeat; take
 * and renew are one atomic statement (`… WHERE expires_at < now() OR holder = me`).
 */
export const sourceLeases = pgTable(
  'source_leases',
  {
    sourceId: integer('source_id')
      .notNull()
      .references(() => sources.id, { onDelete: 'cascade' }),
    mqttClientId: text('mqtt_client_id').notNull().default(''),
    holder: text('holder').notNull(),
    expiresAt: timestamp('expires_at', { withTimezone: true }).notNull(),
  },
  (t) => [primaryKey({ columns: [t.sourceId, t.mqttClientId] }), index('source_leases_holder_idx').on(t.holder)],
);

/**
 * Topics seen on an MQTT source, for the wiring view: upserted by ingest in batches (counts are
 * added, so several workers on one source sum up). `last_payload` is the first 256 characters
 * of the last payload; `tag_id` the tag that mapped it then (no foreign key: a tag deleted in
 * between must not fail a batch).
 */
export const mqttDiscovery = pgTable(
  'mqtt_discovery',
  {
    sourceId: integer('source_id')
      .notNull()
      .references(() => sources.id, { onDelete: 'cascade' }),
    topic: text('topic').notNull(),
    lastPayload: text('last_payload').notNull(),
    firstSeen: timestamp('first_seen', { withTimezone: true }).notNull(),
    lastSeen: timestamp('last_seen', { withTimezone: true }).notNull(),
    count: bigint('count', { mode: 'number' }).notNull(),
    tagId: integer('tag_id'),
  },
  (t) => [primaryKey({ columns: [t.sourceId, t.topic] })],
);

/**
 * The one OPC UA client application instance certificate (OPC 10000-4 §6.1) that every
 * Flocstream process presents — ingest's subscriptions and the API's connection test and
 * browse, on any host — so an integrator trusts one certificate. Created by the first process
 * that needs it; each process copies it into its own PKI folder.
 */
export const opcuaClientIdentity = pgTable(
  'opcua_client_identity',
  {
    id: smallint('id').primaryKey().default(1),
    applicationUri: text('application_uri').notNull(),
    certificatePem: text('certificate_pem').notNull(),
    privateKeyPem: text('private_key_pem').notNull(),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [check('opcua_client_identity_single', sql`${t.id} = 1`)],
);
