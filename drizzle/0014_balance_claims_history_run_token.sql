CREATE TABLE "balance_claims" (
	"plant_id" integer NOT NULL,
	"interval_start" timestamp with time zone NOT NULL,
	"claimed_by" text NOT NULL,
	"claimed_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "balance_claims_plant_id_interval_start_pk" PRIMARY KEY("plant_id","interval_start")
);
--> statement-breakpoint
ALTER TABLE "history_jobs" ADD COLUMN "run_token" text;--> statement-breakpoint
ALTER TABLE "balance_claims" ADD CONSTRAINT "balance_claims_plant_id_plants_id_fk" FOREIGN KEY ("plant_id") REFERENCES "public"."plants"("id") ON DELETE cascade ON UPDATE no action;