-- Ingest re-reads its sources and tags as soon as they change: any statement that writes
-- `sources` or `tags` (the API, a CSV import, the demo seed, psql) announces it on channel
-- `flocstream_ingest` with the payload {"event":"wiring","table":"sources"|"tags"}. PostgreSQL
-- delivers it when the transaction commits and folds identical notifications of one
-- transaction into one (PostgreSQL documentation, NOTIFY), so a bulk import wakes ingest once.
-- Ingest still re-reads on a slow timer (INGEST_RELOAD_MS) in case its LISTEN connection was
-- down when a change committed.
CREATE FUNCTION flocstream_notify_wiring() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
  PERFORM pg_notify('flocstream_ingest', json_build_object('event', 'wiring', 'table', TG_TABLE_NAME)::text);
  RETURN NULL;
END
$$;
--> statement-breakpoint
CREATE TRIGGER sources_notify_wiring AFTER INSERT OR UPDATE OR DELETE OR TRUNCATE ON sources FOR EACH STATEMENT EXECUTE FUNCTION flocstream_notify_wiring();
--> statement-breakpoint
CREATE TRIGGER tags_notify_wiring AFTER INSERT OR UPDATE OR DELETE OR TRUNCATE ON tags FOR EACH STATEMENT EXECUTE FUNCTION flocstream_notify_wiring();
