import { bigserial, boolean, doublePrecision, index, integer, jsonb, pgTable, serial, smallint, text, timestamp, primaryKey, bigint } from 'drizzle-orm/pg-core';
import { plants } from './plant.ts';
import { tags } from './wiring.ts';

/** Rollups kept by ingest as data arrives (min, max, sum, count, last) per tag and bucket. */
function rollupColumns() {
  return {
    tagId: integer('tag_id').notNull(),
    bucket: timestamp('bucket', { withTimezone: true }).notNull(),
    min: doublePrecision('min').notNull(),
    max: doublePrecision('max').notNull(),
    sum: doublePrecision('sum').notNull(),
    count: bigint('count', { mode: 'number' }).notNull(),
    last: doublePrecision('last').notNull(),
    lastTs: timestamp('last_ts', { withTimezone: true }).notNull(),
    /** Worst sample quality in the bucket (shared/contracts/sample-quality.ts). */
    quality: smallint('quality').notNull().default(0),
  };
}
export const rollup1m = pgTable('rollup_1m', rollupColumns(), (t) => [primaryKey({ columns: [t.tagId, t.bucket] })]);
export const rollup1h = pgTable('rollup_1h', rollupColumns(), (t) => [primaryKey({ columns: [t.tagId, t.bucket] })]);

/** Latest value per tag, the cache the API and the balance engine read. */
export const tagLatest = pgTable('tag_latest', {
  tagId: integer('tag_id')
    .primaryKey()
    .references(() => tags.id, { onDelete: 'cascade' }),
  ts: timestamp('ts', { withTimezone: true }).notNull(),
  value: doublePrecision('value'),
  quality: smallint('quality').notNull(),
  receivedAt: timestamp('received_at', { withTimezone: true }).notNull().defaultNow(),
});

export const balances = pgTable(
  'balances',
  {
    id: bigserial('id', { mode: 'number' }).primaryKey(),
    plantId: integer('plant_id')
      .notNull()
      .references(() => plants.id, { onDelete: 'cascade' }),
    ts: timestamp('ts', { withTimezone: true }).notNull(),
    quality: text('quality', { enum: ['good', 'estimated', 'unavailable'] }).notNull(),
    data: jsonb('data').notNull(),
    inputs: jsonb('inputs').notNull(),
    /** Computed afterwards over imported history (server/jobs/balance-recompute.job.ts), not live. */
    recomputed: boolean('recomputed').notNull().default(false),
  },
  (t) => [index('balances_plant_ts_idx').on(t.plantId, t.ts)],
);

/**
 * One row per plant and live balance interval, taken by the API process that computes it
 * (server/jobs/balance-engine.ts): the primary key makes the claim, so however many API
 * processes run the engine's BullMQ worker, and whatever BullMQ delivers twice (a scheduler
 * re-created by a restarting process, a stalled job handed to another worker), one interval is
 * computed and stored once. Rows older than two days are pruned by the engine's sync job.
 */
export const balanceClaims = pgTable(
  'balance_claims',
  {
    plantId: integer('plant_id')
      .notNull()
      .references(() => plants.id, { onDelete: 'cascade' }),
    /** Start of the interval: the computation time floored to `balance.interval_s` on the Unix epoch. */
    intervalStart: timestamp('interval_start', { withTimezone: true }).notNull(),
    /** The engine that won the claim (host:pid:instance). */
    claimedBy: text('claimed_by').notNull(),
    claimedAt: timestamp('claimed_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [primaryKey({ columns: [t.plantId, t.intervalStart] })],
);

export const labResults = pgTable(
  'lab_results',
  {
    id: serial('id').primaryKey(),
    plantId: integer('plant_id')
      .notNull()
      .references(() => plants.id, { onDelete: 'cascade' }),
    /** Basin or clarifier code the sample was taken from, if any. */
    location: text('location'),
    kind: text('kind', { enum: ['SVI', 'DSVI', 'SSVI', 'MLSS', 'TSS'] }).notNull(),
    value: doublePrecision('value').notNull(),
    unit: text('unit').notNull(),
    sampledAt: timestamp('sampled_at', { withTimezone: true }).notNull(),
    details: jsonb('details').notNull().default({}),
    flags: text('flags').array().notNull().default([]),
    enteredBy: integer('entered_by'),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [index('lab_results_plant_ts_idx').on(t.plantId, t.sampledAt)],
);

export const alarms = pgTable(
  'alarms',
  {
    id: serial('id').primaryKey(),
    plantId: integer('plant_id')
      .notNull()
      .references(() => plants.id, { onDelete: 'cascade' }),
    rule: text('rule').notNull(),
    target: text('target').notNull().default(''),
    priority: smallint('priority').notNull(),
    state: text('state', { enum: ['raised', 'acknowledged', 'cleared'] }).notNull(),
    message: text('message').notNull(),
    value: doublePrecision('value'),
    limit: doublePrecision('limit'),
    raisedAt: timestamp('raised_at', { withTimezone: true }).notNull(),
    acknowledgedAt: timestamp('acknowledged_at', { withTimezone: true }),
    acknowledgedBy: integer('acknowledged_by'),
    clearedAt: timestamp('cleared_at', { withTimezone: true }),
    /**
     * ISA-18.2 designed suppression: non-null while the alarm's condition holds but it is not
     * annunciated by design (why); set back to null, with raised_at = the time, when it is annunciated.
     */
    suppressedReason: text('suppressed_reason'),
    /** ISA-18.2 shelving by an operator: not annunciated until this time (null: not shelved). */
    shelvedUntil: timestamp('shelved_until', { withTimezone: true }),
    shelvedBy: integer('shelved_by'),
    shelveReason: text('shelve_reason'),
  },
  (t) => [index('alarms_plant_state_idx').on(t.plantId, t.state)],
);

export const notifications = pgTable('notifications', {
  id: serial('id').primaryKey(),
  ts: timestamp('ts', { withTimezone: true }).notNull().defaultNow(),
  kind: text('kind').notNull(),
  recipients: text('recipients').array().notNull(),
  subject: text('subject').notNull(),
  status: text('status').notNull(),
  details: jsonb('details').notNull().default({}),
});
