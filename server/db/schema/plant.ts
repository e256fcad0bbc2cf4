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
    volume_m3: doublePrecision('volume_m3').notNull(),
    aerobic: boolean('aerobic').notNull().default(true),
  },
  (t) => [uniqueIndex('basins_train_code_uq').on(t.trainId, t.code)],
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
    area_m2: doublePrecision('area_m2').notNull(),
    sideWaterDepth_m: doublePrecision('side_water_depth_m').notNull(),
    count: integer('count').notNull().default(1),
  },
  (t) => [uniqueIndex('clarifiers_train_code_uq').on(t.trainId, t.code)],
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
    capacity_m3h: doublePrecision('capacity_m3h').notNull(),
  },
  (t) => [uniqueIndex('pumps_train_code_uq').on(t.trainId, t.code)],
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
