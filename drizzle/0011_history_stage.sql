-- Staging of historian imports (server/jobs/history-import.job.ts): every checked row of a file
-- is copied here first and moved into `samples` only when the whole file is free of errors
-- (INSERT … SELECT … ON CONFLICT DO NOTHING in one transaction). One list partition per job,
-- created UNLOGGED by the job with its job_id as the partition's column default (so the job
-- COPYs four columns) and dropped when the job ends: the rows are a scratch copy of a file still
-- on disk, so skipping the WAL loses nothing a crash could not redo, and a DROP frees 10 million
-- rows at once where a DELETE would rewrite them (PostgreSQL 15 documentation, CREATE TABLE,
-- "UNLOGGED" and "PARTITION OF").
CREATE TABLE IF NOT EXISTS "history_stage" (
	"job_id" integer NOT NULL,
	"tag_id" integer NOT NULL,
	"ts" timestamp with time zone NOT NULL,
	"value" double precision,
	"quality" smallint NOT NULL
) PARTITION BY LIST ("job_id");
--> statement-breakpoint
-- The API connects as a role that may not create or drop tables (server/db/migrate.ts
-- grantRuntimeRoles), yet each import job needs a partition of its own: the two functions run
-- with their owner's rights and a fixed search_path, as for the day partitions of `samples`
-- ("Writing SECURITY DEFINER Functions Safely", PostgreSQL 15 documentation, CREATE FUNCTION).
-- The partition is the owner's; default privileges give the API its rows.
CREATE OR REPLACE FUNCTION flocstream_open_history_stage(job integer) RETURNS text
LANGUAGE plpgsql SECURITY DEFINER SET search_path = public, pg_temp AS $$
DECLARE t text := 'history_stage_' || job;
BEGIN
  EXECUTE format('DROP TABLE IF EXISTS %I', t);
  EXECUTE format('CREATE UNLOGGED TABLE %I PARTITION OF history_stage FOR VALUES IN (%s)', t, job);
  EXECUTE format('ALTER TABLE %I ALTER COLUMN job_id SET DEFAULT %s', t, job);
  RETURN t;
END $$;
--> statement-breakpoint
CREATE OR REPLACE FUNCTION flocstream_drop_history_stage(job integer) RETURNS void
LANGUAGE plpgsql SECURITY DEFINER SET search_path = public, pg_temp AS $$
BEGIN
  EXECUTE format('DROP TABLE IF EXISTS %I', 'history_stage_' || job);
END $$;
--> statement-breakpoint
REVOKE ALL ON FUNCTION flocstream_open_history_stage(integer), flocstream_drop_history_stage(integer) FROM PUBLIC;
