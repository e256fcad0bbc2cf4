import { bigint, doublePrecision, index, integer, jsonb, pgTable, serial, text, timestamp } from 'drizzle-orm/pg-core';
import { plants } from './plant.ts';

/**
 * History jobs: a historian import (CSV checked, staged, moved into `samples`, rollups rebuilt)
 * and the balance recompute that follows it. The BullMQ job carries only the row id; this row is
 * what `GET /api/v1/jobs/:jobId` answers, so the state outlives the queue's own retention.
 * The staging table `history_stage` (one UNLOGGED list partition per job) lives in a custom migration (0011).
 */
export const historyJobs = pgTable(
  'history_jobs',
  {
    id: serial('id').primaryKey(),
    plantId: integer('plant_id')
      .notNull()
      .references(() => plants.id, { onDelete: 'cascade' }),
    kind: text('kind', { enum: ['import', 'recompute'] }).notNull(),
    state: text('state', { enum: ['queued', 'running', 'done', 'failed'] }).notNull().default('queued'),
    /** 0–1. */
    progress: doublePrecision('progress').notNull().default(0),
    /** Data rows read (import) or balances computed (recompute). */
    rows: bigint('rows', { mode: 'number' }).notNull().default(0),
    /** Lines refused. */
    rejected: bigint('rejected', { mode: 'number' }).notNull().default(0),
    /** The first 1000 problems, [{line, field, message}]. */
    errors: jsonb('errors').notNull().default([]),
    /** What was asked (layout, format, time zone, dry run, file name and size). */
    options: jsonb('options').notNull().default({}),
    /** What was done (rows inserted, window, recompute job id). */
    result: jsonb('result').notNull().default({}),
    /** The import a recompute follows. */
    parentId: integer('parent_id'),
    createdBy: integer('created_by'),
    /** The BullMQ job that runs this row (server/jobs/history-jobs.ts claims it): another delivery of the same row is skipped. */
    runToken: text('run_token'),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
    startedAt: timestamp('started_at', { withTimezone: true }),
    finishedAt: timestamp('finished_at', { withTimezone: true }),
  },
  (t) => [index('history_jobs_plant_idx').on(t.plantId, t.createdAt)],
);
