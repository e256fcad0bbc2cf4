ALTER TABLE "tags" ADD COLUMN "kind" text DEFAULT 'analog' NOT NULL;--> statement-breakpoint
ALTER TABLE "alarms" ADD COLUMN "suppressed_reason" text;--> statement-breakpoint
ALTER TABLE "alarms" ADD COLUMN "shelved_until" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "alarms" ADD COLUMN "shelved_by" integer;--> statement-breakpoint
ALTER TABLE "alarms" ADD COLUMN "shelve_reason" text;