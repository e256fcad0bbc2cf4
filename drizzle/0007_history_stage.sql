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
