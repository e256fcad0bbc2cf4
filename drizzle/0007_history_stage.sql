-- Staging of historian imports (server/jobs/history-import.job.ts): every checked row of a file
-- is copied here first and moved into `samples` only when the whole file is free of errors
-- (INSERT … SELECT … ON CONFLICT DO NOTHING in one transaction). UNLOGGED: the rows are a
-- scratch copy of a file still on disk, so a crash losing them loses nothing (PostgreSQL
-- documentation, CREATE TABLE, "UNLOGGED"); skipping the WAL halves the write volume.
CREATE UNLOGGED TABLE IF NOT EXISTS "history_stage" (
	"job_id" integer NOT NULL,
	"tag_id" integer NOT NULL,
	"ts" timestamp with time zone NOT NULL,
	"value" double precision,
	"quality" smallint NOT NULL
);
--> statement-breakpoint
CREATE INDEX IF NOT EXISTS "history_stage_job_idx" ON "history_stage" ("job_id");
