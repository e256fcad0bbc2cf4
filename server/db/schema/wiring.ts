import { boolean, doublePrecision, index, integer, jsonb, pgTable, serial, text, timestamp, uniqueIndex } from 'drizzle-orm/pg-core';
import { plants } from './plant.ts';

/** An MQTT broker or OPC UA endpoint. Credentials stay on the server: never returned by the API. */
export const sources = pgTable(
  'sources',
  {
    id: serial('id').primaryKey(),
    plantId: integer('plant_id')
      .notNull()
      .references(() => plants.id, { onDelete: 'cascade' }),
    name: text('name').notNull(),
    kind: text('kind', { enum: ['mqtt', 'opcua'] }).notNull(),
    url: text('url').notNull(),
    username: text('username'),
    secret: text('secret'),
    options: jsonb('options').notNull().default({}),
    enabled: boolean('enabled').notNull().default(true),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [uniqueIndex('sources_plant_name_uq').on(t.plantId, t.name)],
);

export const tags = pgTable(
  'tags',
  {
    id: serial('id').primaryKey(),
    plantId: integer('plant_id')
      .notNull()
      .references(() => plants.id, { onDelete: 'cascade' }),
    sourceId: integer('source_id')
      .notNull()
      .references(() => sources.id, { onDelete: 'cascade' }),
    name: text('name').notNull(),
    description: text('description').notNull().default(''),
    /** MQTT topic (exact, or a pattern with + and #) or OPC UA NodeId. */
    address: text('address').notNull(),
    unit: text('unit').notNull(),
    /** Engineering value = raw × scaleGain + scaleOffset. */
    scaleGain: doublePrecision('scale_gain').notNull().default(1),
    scaleOffset: doublePrecision('scale_offset').notNull().default(0),
    deadband: doublePrecision('deadband').notNull().default(0),
    expectedPeriod_s: doublePrecision('expected_period_s').notNull().default(10),
    rangeLow: doublePrecision('range_low'),
    rangeHigh: doublePrecision('range_high'),
    samplingInterval_ms: integer('sampling_interval_ms'),
    /** What the value is: analog (a measurement), state (e.g. pump running 0/1) or counter (a running total); only analog values are checked for a flat line. */
    kind: text('kind', { enum: ['analog', 'state', 'counter'] }).notNull().default('analog'),
    enabled: boolean('enabled').notNull().default(true),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [
    uniqueIndex('tags_plant_name_uq').on(t.plantId, t.name),
    uniqueIndex('tags_source_address_uq').on(t.sourceId, t.address),
  ],
);

/** Which tag is which process signal of which basin, clarifier, pump or the plant itself. */
export const signalMap = pgTable(
  'signal_map',
  {
    id: serial('id').primaryKey(),
    plantId: integer('plant_id')
      .notNull()
      .references(() => plants.id, { onDelete: 'cascade' }),
    signal: text('signal').notNull(),
    targetType: text('target_type', { enum: ['plant', 'train', 'basin', 'clarifier', 'pump'] }).notNull(),
    targetId: integer('target_id').notNull(),
    tagId: integer('tag_id')
      .notNull()
      .references(() => tags.id, { onDelete: 'cascade' }),
  },
  (t) => [
    uniqueIndex('signal_map_target_uq').on(t.plantId, t.signal, t.targetType, t.targetId),
    index('signal_map_tag_idx').on(t.tagId),
  ],
);

/**
 * Messages the ingest pipeline could not decode or map, with the reason (nothing is dropped
 * silently). One row per delivery identity (ingest/pipeline/types.ts deliveryKey): the same bad
 * message arriving again — redelivered by the broker after a lost PUBACK, or published again —
 * counts up `times_seen` on its row instead of adding one.
 */
export const deadLetters = pgTable(
  'dead_letters',
  {
    id: serial('id').primaryKey(),
    /** First arrival. */
    ts: timestamp('ts', { withTimezone: true }).notNull().defaultNow(),
    sourceId: integer('source_id'),
    address: text('address'),
    payload: text('payload'),
    payloadBytes: integer('payload_bytes').notNull().default(0),
    reason: text('reason').notNull(),
    /** Hex SHA-256 of the delivery identity (source, address, reason and the message's digest, or an OPC UA node, source timestamp and status); null on rows stored before it existed. */
    deliveryKey: text('delivery_key'),
    /** Arrivals of this delivery, the first included. */
    timesSeen: integer('times_seen').notNull().default(1),
    /** Latest arrival; null when seen once (then it is `ts`). */
    lastSeenAt: timestamp('last_seen_at', { withTimezone: true }),
  },
  (t) => [index('dead_letters_ts_idx').on(t.ts), uniqueIndex('dead_letters_delivery_key_uq').on(t.deliveryKey)],
);
