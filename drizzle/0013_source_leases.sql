CREATE TABLE "source_leases" (
	"source_id" integer NOT NULL,
	"mqtt_client_id" text DEFAULT '' NOT NULL,
	"holder" text NOT NULL,
	"expires_at" timestamp with time zone NOT NULL,
	CONSTRAINT "source_leases_source_id_mqtt_client_id_pk" PRIMARY KEY("source_id","mqtt_client_id")
);
--> statement-breakpoint
ALTER TABLE "source_leases" ADD CONSTRAINT "source_leases_source_id_sources_id_fk" FOREIGN KEY ("source_id") REFERENCES "public"."sources"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "source_leases_holder_idx" ON "source_leases" USING btree ("holder");