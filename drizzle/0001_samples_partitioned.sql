-- Time series: range-partitioned by day on ts (PostgreSQL declarative partitioning, PG ≥ 11).
-- The primary key (tag_id, ts) makes a replayed sample a no-op (ON CONFLICT DO NOTHING)
-- and is allowed on a partitioned table because it contains the partition key.
CREATE TABLE IF NOT EXISTS "samples" (
	"tag_id" integer NOT NULL,
	"ts" timestamp with time zone NOT NULL,
	"value" double precision,
	"quality" smallint NOT NULL,
	CONSTRAINT "samples_pk" PRIMARY KEY ("tag_id", "ts")
) PARTITION BY RANGE ("ts");
--> statement-breakpoint
-- Rows outside every day partition land here instead of failing the batch; ingest moves
-- them into their day partition once that exists (flocstream_ensure_day_partition below).
CREATE TABLE IF NOT EXISTS "samples_default" PARTITION OF "samples" DEFAULT;
--> statement-breakpoint
-- Creates the partition for the UTC day containing `day` (idempotent) and returns its name.
CREATE OR REPLACE FUNCTION flocstream_ensure_day_partition(day timestamptz) RETURNS text
LANGUAGE plpgsql AS $$
DECLARE
	d0 timestamptz := date_trunc('day', day AT TIME ZONE 'UTC') AT TIME ZONE 'UTC';
	d1 timestamptz := d0 + interval '1 day';
	pname text := 'samples_' || to_char(d0 AT TIME ZONE 'UTC', 'YYYYMMDD');
	moved bigint;
BEGIN
	IF to_regclass(pname) IS NOT NULL THEN
		RETURN pname;
	END IF;
	-- Rows of that day already in the default partition block the new partition: move them.
	CREATE TEMP TABLE IF NOT EXISTS flocstream_moving (LIKE samples) ON COMMIT DROP;
	WITH m AS (DELETE FROM samples_default WHERE ts >= d0 AND ts < d1 RETURNING *)
	INSERT INTO flocstream_moving SELECT * FROM m;
	GET DIAGNOSTICS moved = ROW_COUNT;
	EXECUTE format('CREATE TABLE %I PARTITION OF samples FOR VALUES FROM (%L) TO (%L)', pname, d0, d1);
	IF moved > 0 THEN
		INSERT INTO samples SELECT * FROM flocstream_moving ON CONFLICT DO NOTHING;
		DELETE FROM flocstream_moving;
	END IF;
	RETURN pname;
END $$;
--> statement-breakpoint
-- Drops day partitions that end before `keep_after`; returns how many were dropped.
CREATE OR REPLACE FUNCTION flocstream_drop_partitions_before(keep_after timestamptz) RETURNS integer
LANGUAGE plpgsql AS $$
DECLARE
	r record;
	n integer := 0;
BEGIN
	FOR r IN
		SELECT c.relname
		FROM pg_inherits i JOIN pg_class c ON c.oid = i.inhrelid
		WHERE i.inhparent = 'samples'::regclass AND c.relname ~ '^samples_[0-9]{8}$'
	LOOP
		IF (to_date(substr(r.relname, 9), 'YYYYMMDD')::timestamp AT TIME ZONE 'UTC') + interval '1 day' <= keep_after THEN
			EXECUTE format('DROP TABLE %I', r.relname);
			n := n + 1;
		END IF;
	END LOOP;
	RETURN n;
END $$;
--> statement-breakpoint
SELECT flocstream_ensure_day_partition(now() - interval '1 day');
--> statement-breakpoint
SELECT flocstream_ensure_day_partition(now());
--> statement-breakpoint
SELECT flocstream_ensure_day_partition(now() + interval '1 day');
