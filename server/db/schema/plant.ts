import { boolean, doublePrecision, index, integer, jsonb, pgTable, serial, text, timestamp, uniqueIndex } from 'drizzle-orm/pg-core';

export const plants = pgTable(
  'plants',
  {
    id: serial('id').primaryKey(),
    code: text('code').notNull(),
    name: text('name').notNull(),
    timezone: text('timezone').notNull().default('UTC'),
    /** Peak wet-weather flow used by the live storm projection [m³/h]. */
    peakFlow_m3h: doublePrecision('peak_flow_m3h'),
    /** What the monitor and CSV exports display (storage and the API stay SI). */
    unitSystem: text('unit_system', { enum: ['SI', 'US'] }).notNull().default('SI'),
    /** Set when the plant is retired: its history stays, the balance engine stops computing it. */
    retiredAt: timestamp('retired_at', { withTimezone: true }),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [uniqueIndex('plants_code_uq').on(t.code)],
);

export const trains = pgTable(
  'trains',
  {
    id: serial('id').primaryKey(),
    plantId: integer('plant_id')
      .notNull()
      .references(() => plants.id, { onDelete: 'cascade' }),
    code: text('code').notNull(),
    name: text('name').notNull(),
  },
  (t) => [uniqueIndex('trains_plant_code_uq').on(t.plantId, t.code)],
);

export const basins = pgTable(
  'basins',
  {
    id: serial('id').primaryKey(),
    trainId: integer('train_id')
      .notNull()
      .references(() => trains.id, { onDelete: 'cascade' }),
    code: text('code').notNull(),
    name: text('name').notNull(),
  },
  (t) => [uniqueIndex('basins_train_code_uq').on(t.trainId, t.code)],
);

/**
 * Geometry is effective-dated: each row holds from `effective_from` until the unit's next row.
 * The first row of a unit also holds for every earlier time (history imported from before the
 * plant was set up is computed with it); `in_service = false` takes the unit out of the layout
 * for its period. Balances of the past therefore keep the geometry that held then.
 */
export const basinVersions = pgTable(
  'basin_versions',
  {
    id: serial('id').primaryKey(),
    basinId: integer('basin_id')
      .notNull()
      .references(() => basins.id, { onDelete: 'cascade' }),
    effectiveFrom: timestamp('effective_from', { withTimezone: true }).notNull(),
    volume_m3: doublePrecision('volume_m3').notNull(),
    /** Aerated share of the volume (1 = fully aerobic), for the aerobic SRT. */
    aeratedFraction: doublePrecision('aerated_fraction').notNull(),
    sideWaterDepth_m: doublePrecision('side_water_depth_m'),
    inService: boolean('in_service').notNull().default(true),
  },
  (t) => [uniqueIndex('basin_versions_uq').on(t.basinId, t.effectiveFrom)],
);

export const clarifiers = pgTable(
  'clarifiers',
  {
    id: serial('id').primaryKey(),
    trainId: integer('train_id')
      .notNull()
      .references(() => trains.id, { onDelete: 'cascade' }),
    code: text('code').notNull(),
    name: text('name').notNull(),
  },
  (t) => [uniqueIndex('clarifiers_train_code_uq').on(t.trainId, t.code)],
);

export const clarifierVersions = pgTable(
  'clarifier_versions',
  {
    id: serial('id').primaryKey(),
    clarifierId: integer('clarifier_id')
      .notNull()
      .references(() => clarifiers.id, { onDelete: 'cascade' }),
    effectiveFrom: timestamp('effective_from', { withTimezone: true }).notNull(),
    /** Surface area of one clarifier [m²]. */
    area_m2: doublePrecision('area_m2').notNull(),
    sideWaterDepth_m: doublePrecision('side_water_depth_m').notNull(),
    feedDepth_m: doublePrecision('feed_depth_m'),
    /** Identical clarifiers described by this row. */
    count: integer('count').notNull().default(1),
    inService: boolean('in_service').notNull().default(true),
  },
  (t) => [uniqueIndex('clarifier_versions_uq').on(t.clarifierId, t.effectiveFrom)],
);

export const pumps = pgTable(
  'pumps',
  {
    id: serial('id').primaryKey(),
    trainId: integer('train_id')
      .notNull()
      .references(() => trains.id, { onDelete: 'cascade' }),
    code: text('code').notNull(),
    name: text('name').notNull(),
    kind: text('kind', { enum: ['ras', 'was'] }).notNull(),
    /** The clarifier the pump draws from; null = it serves its train as a whole. */
    clarifierId: integer('clarifier_id').references(() => clarifiers.id, { onDelete: 'set null' }),
  },
  (t) => [uniqueIndex('pumps_train_code_uq').on(t.trainId, t.code)],
);

export const pumpVersions = pgTable(
  'pump_versions',
  {
    id: serial('id').primaryKey(),
    pumpId: integer('pump_id')
      .notNull()
      .references(() => pumps.id, { onDelete: 'cascade' }),
    effectiveFrom: timestamp('effective_from', { withTimezone: true }).notNull(),
    capacity_m3h: doublePrecision('capacity_m3h').notNull(),
    inService: boolean('in_service').notNull().default(true),
  },
  (t) => [uniqueIndex('pump_versions_uq').on(t.pumpId, t.effectiveFrom)],
);

/** Settings: plantId 0 holds the global defaults, a plant's own row overrides them. */
export const settings = pgTable(
  'settings',
  {
    id: serial('id').primaryKey(),
    plantId: integer('plant_id').notNull().default(0),
    key: text('key').notNull(),
    value: jsonb('value').notNull(),
    updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
    updatedBy: integer('updated_by'),
  },
  (t) => [uniqueIndex('settings_plant_key_uq').on(t.plantId, t.key), index('settings_key_idx').on(t.key)],
);
