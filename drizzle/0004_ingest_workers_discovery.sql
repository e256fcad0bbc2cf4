CREATE TABLE "ingest_workers" (
	"id" text PRIMARY KEY NOT NULL,
	"host" text NOT NULL,
	"pid" integer NOT NULL,
	"started_at" timestamp with time zone NOT NULL,
	"heartbeat_at" timestamp with time zone NOT NULL,
	"heartbeat_ms" integer NOT NULL,
	"stopped_at" timestamp with time zone,
	"status" jsonb NOT NULL
);
--> statement-breakpoint
CREATE TABLE "mqtt_discovery" (
	"source_id" integer NOT NULL,
	"topic" text NOT NULL,
	"last_payload" text NOT NULL,
	"first_seen" timestamp with time zone NOT NULL,
	"last_seen" timestamp with time zone NOT NULL,
	"count" bigint NOT NULL,
	"tag_id" integer,
	CONSTRAINT "mqtt_discovery_source_id_topic_pk" PRIMARY KEY("source_id","topic")
);
--> statement-breakpoint
CREATE TABLE "opcua_client_identity" (
	"id" smallint PRIMARY KEY DEFAULT 1 NOT NULL,
	"application_uri" text NOT NULL,
	"certificate_pem" text NOT NULL,
	"private_key_pem" text NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "opcua_client_identity_single" CHECK ("opcua_client_identity"."id" = 1)
);
--> statement-breakpoint
ALTER TABLE "mqtt_discovery" ADD CONSTRAINT "mqtt_discovery_source_id_sources_id_fk" FOREIGN KEY ("source_id") REFERENCES "public"."sources"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "ingest_workers_heartbeat_idx" ON "ingest_workers" USING btree ("heartbeat_at");