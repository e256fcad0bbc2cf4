ALTER TABLE "dead_letters" ADD COLUMN "delivery_key" text;--> statement-breakpoint
ALTER TABLE "dead_letters" ADD COLUMN "times_seen" integer DEFAULT 1 NOT NULL;--> statement-breakpoint
ALTER TABLE "dead_letters" ADD COLUMN "last_seen_at" timestamp with time zone;--> statement-breakpoint
CREATE UNIQUE INDEX "dead_letters_delivery_key_uq" ON "dead_letters" USING btree ("delivery_key");