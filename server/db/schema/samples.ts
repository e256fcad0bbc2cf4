import { doublePrecision, integer, pgTable, smallint, timestamp } from 'drizzle-orm/pg-core';

/**
 * Time series, one row per (tag, timestamp). The table is range-partitioned by day, which
 * Drizzle has no syntax for, so it is created by the custom migration
 * drizzle/0001_samples_partitioned.sql and kept out of drizzle-kit's schema list
 * (drizzle.config.ts); this definition is for typed queries only.
 */
export const samples = pgTable('samples', {
  tagId: integer('tag_id').notNull(),
  ts: timestamp('ts', { withTimezone: true }).notNull(),
  value: doublePrecision('value'),
  quality: smallint('quality').notNull(),
});
