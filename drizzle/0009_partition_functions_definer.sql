-- Ingest runs as a role without CREATE on the schema (server/db/migrate.ts grantRuntimeRoles), yet
-- creates day partitions and applies retention: the two functions run with their owner's rights
-- (SECURITY DEFINER) and a fixed search_path, as the PostgreSQL manual advises for such functions
-- ("Writing SECURITY DEFINER Functions Safely", CREATE FUNCTION).
ALTER FUNCTION flocstream_ensure_day_partition(timestamptz) SECURITY DEFINER SET search_path = public, pg_temp;
--> statement-breakpoint
ALTER FUNCTION flocstream_drop_partitions_before(timestamptz) SECURITY DEFINER SET search_path = public, pg_temp;
--> statement-breakpoint
REVOKE EXECUTE ON FUNCTION flocstream_ensure_day_partition(timestamptz), flocstream_drop_partitions_before(timestamptz) FROM PUBLIC;
