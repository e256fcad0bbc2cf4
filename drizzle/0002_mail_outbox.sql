CREATE TABLE "mail_outbox" (
	"id" bigserial PRIMARY KEY NOT NULL,
	"received_at" timestamp with time zone DEFAULT now() NOT NULL,
	"mail_from" text NOT NULL,
	"rcpt_to" text[] NOT NULL,
	"subject" text DEFAULT '' NOT NULL,
	"text" text DEFAULT '' NOT NULL,
	"raw" text NOT NULL,
	"size" integer NOT NULL
);
--> statement-breakpoint
CREATE INDEX "mail_outbox_received_idx" ON "mail_outbox" USING btree ("received_at");