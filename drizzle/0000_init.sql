CREATE TABLE "api_tokens" (
	"id" serial PRIMARY KEY NOT NULL,
	"user_id" integer NOT NULL,
	"name" text NOT NULL,
	"role" text NOT NULL,
	"token_hash" text NOT NULL,
	"prefix" text NOT NULL,
	"plant_ids" integer[],
	"expires_at" timestamp with time zone NOT NULL,
	"revoked_at" timestamp with time zone,
	"last_used_at" timestamp with time zone,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "audit_log" (
	"id" bigserial PRIMARY KEY NOT NULL,
	"ts" timestamp with time zone DEFAULT now() NOT NULL,
	"user_id" integer,
	"token_id" integer,
	"actor" text NOT NULL,
	"action" text NOT NULL,
	"target" text,
	"details" jsonb,
	"ip" text
);
--> statement-breakpoint
CREATE TABLE "users" (
	"id" serial PRIMARY KEY NOT NULL,
	"email" text NOT NULL,
	"name" text NOT NULL,
	"role" text NOT NULL,
	"password_hash" text NOT NULL,
	"disabled" boolean DEFAULT false NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "basins" (
	"id" serial PRIMARY KEY NOT NULL,
	"train_id" integer NOT NULL,
	"code" text NOT NULL,
	"name" text NOT NULL,
	"volume_m3" double precision NOT NULL,
	"aerobic" boolean DEFAULT true NOT NULL
);
--> statement-breakpoint
CREATE TABLE "clarifiers" (
	"id" serial PRIMARY KEY NOT NULL,
	"train_id" integer NOT NULL,
	"code" text NOT NULL,
	"name" text NOT NULL,
	"area_m2" double precision NOT NULL,
	"side_water_depth_m" double precision NOT NULL,
	"count" integer DEFAULT 1 NOT NULL
);
--> statement-breakpoint
CREATE TABLE "plants" (
	"id" serial PRIMARY KEY NOT NULL,
	"code" text NOT NULL,
	"name" text NOT NULL,
	"timezone" text DEFAULT 'UTC' NOT NULL,
	"peak_flow_m3h" double precision,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "pumps" (
	"id" serial PRIMARY KEY NOT NULL,
	"train_id" integer NOT NULL,
	"code" text NOT NULL,
	"name" text NOT NULL,
	"kind" text NOT NULL,
	"capacity_m3h" double precision NOT NULL
);
--> statement-breakpoint
CREATE TABLE "settings" (
	"id" serial PRIMARY KEY NOT NULL,
	"plant_id" integer DEFAULT 0 NOT NULL,
	"key" text NOT NULL,
	"value" jsonb NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_by" integer
);
--> statement-breakpoint
CREATE TABLE "trains" (
	"id" serial PRIMARY KEY NOT NULL,
	"plant_id" integer NOT NULL,
	"code" text NOT NULL,
	"name" text NOT NULL
);
--> statement-breakpoint
CREATE TABLE "dead_letters" (
	"id" serial PRIMARY KEY NOT NULL,
	"ts" timestamp with time zone DEFAULT now() NOT NULL,
	"source_id" integer,
	"address" text,
	"payload" text,
	"payload_bytes" integer DEFAULT 0 NOT NULL,
	"reason" text NOT NULL
);
--> statement-breakpoint
CREATE TABLE "signal_map" (
	"id" serial PRIMARY KEY NOT NULL,
	"plant_id" integer NOT NULL,
	"signal" text NOT NULL,
	"target_type" text NOT NULL,
	"target_id" integer NOT NULL,
	"tag_id" integer NOT NULL
);
--> statement-breakpoint
CREATE TABLE "sources" (
	"id" serial PRIMARY KEY NOT NULL,
	"plant_id" integer NOT NULL,
	"name" text NOT NULL,
	"kind" text NOT NULL,
	"url" text NOT NULL,
	"username" text,
	"secret" text,
	"options" jsonb DEFAULT '{}'::jsonb NOT NULL,
	"enabled" boolean DEFAULT true NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "tags" (
	"id" serial PRIMARY KEY NOT NULL,
	"plant_id" integer NOT NULL,
	"source_id" integer NOT NULL,
	"name" text NOT NULL,
	"description" text DEFAULT '' NOT NULL,
	"address" text NOT NULL,
	"unit" text NOT NULL,
	"scale_gain" double precision DEFAULT 1 NOT NULL,
	"scale_offset" double precision DEFAULT 0 NOT NULL,
	"deadband" double precision DEFAULT 0 NOT NULL,
	"expected_period_s" double precision DEFAULT 10 NOT NULL,
	"range_low" double precision,
	"range_high" double precision,
	"sampling_interval_ms" integer,
	"enabled" boolean DEFAULT true NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "alarms" (
	"id" serial PRIMARY KEY NOT NULL,
	"plant_id" integer NOT NULL,
	"rule" text NOT NULL,
	"target" text DEFAULT '' NOT NULL,
	"priority" smallint NOT NULL,
	"state" text NOT NULL,
	"message" text NOT NULL,
	"value" double precision,
	"limit" double precision,
	"raised_at" timestamp with time zone NOT NULL,
	"acknowledged_at" timestamp with time zone,
	"acknowledged_by" integer,
	"cleared_at" timestamp with time zone
);
--> statement-breakpoint
CREATE TABLE "balances" (
	"id" bigserial PRIMARY KEY NOT NULL,
	"plant_id" integer NOT NULL,
	"ts" timestamp with time zone NOT NULL,
	"quality" text NOT NULL,
	"data" jsonb NOT NULL,
	"inputs" jsonb NOT NULL
);
--> statement-breakpoint
CREATE TABLE "lab_results" (
	"id" serial PRIMARY KEY NOT NULL,
	"plant_id" integer NOT NULL,
	"location" text,
	"kind" text NOT NULL,
	"value" double precision NOT NULL,
	"unit" text NOT NULL,
	"sampled_at" timestamp with time zone NOT NULL,
	"details" jsonb DEFAULT '{}'::jsonb NOT NULL,
	"flags" text[] DEFAULT '{}' NOT NULL,
	"entered_by" integer,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "notifications" (
	"id" serial PRIMARY KEY NOT NULL,
	"ts" timestamp with time zone DEFAULT now() NOT NULL,
	"kind" text NOT NULL,
	"recipients" text[] NOT NULL,
	"subject" text NOT NULL,
	"status" text NOT NULL,
	"details" jsonb DEFAULT '{}'::jsonb NOT NULL
);
--> statement-breakpoint
CREATE TABLE "rollup_1h" (
	"tag_id" integer NOT NULL,
	"bucket" timestamp with time zone NOT NULL,
	"min" double precision NOT NULL,
	"max" double precision NOT NULL,
	"sum" double precision NOT NULL,
	"count" bigint NOT NULL,
	"last" double precision NOT NULL,
	"last_ts" timestamp with time zone NOT NULL,
	"quality" smallint DEFAULT 0 NOT NULL,
	CONSTRAINT "rollup_1h_tag_id_bucket_pk" PRIMARY KEY("tag_id","bucket")
);
--> statement-breakpoint
CREATE TABLE "rollup_1m" (
	"tag_id" integer NOT NULL,
	"bucket" timestamp with time zone NOT NULL,
	"min" double precision NOT NULL,
	"max" double precision NOT NULL,
	"sum" double precision NOT NULL,
	"count" bigint NOT NULL,
	"last" double precision NOT NULL,
	"last_ts" timestamp with time zone NOT NULL,
	"quality" smallint DEFAULT 0 NOT NULL,
	CONSTRAINT "rollup_1m_tag_id_bucket_pk" PRIMARY KEY("tag_id","bucket")
);
--> statement-breakpoint
CREATE TABLE "tag_latest" (
	"tag_id" integer PRIMARY KEY NOT NULL,
	"ts" timestamp with time zone NOT NULL,
	"value" double precision,
	"quality" smallint NOT NULL,
	"received_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
ALTER TABLE "api_tokens" ADD CONSTRAINT "api_tokens_user_id_users_id_fk" FOREIGN KEY ("user_id") REFERENCES "public"."users"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "basins" ADD CONSTRAINT "basins_train_id_trains_id_fk" FOREIGN KEY ("train_id") REFERENCES "public"."trains"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "clarifiers" ADD CONSTRAINT "clarifiers_train_id_trains_id_fk" FOREIGN KEY ("train_id") REFERENCES "public"."trains"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "pumps" ADD CONSTRAINT "pumps_train_id_trains_id_fk" FOREIGN KEY ("train_id") REFERENCES "public"."trains"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "trains" ADD CONSTRAINT "trains_plant_id_plants_id_fk" FOREIGN KEY ("plant_id") REFERENCES "public"."plants"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "signal_map" ADD CONSTRAINT "signal_map_plant_id_plants_id_fk" FOREIGN KEY ("plant_id") REFERENCES "public"."plants"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "signal_map" ADD CONSTRAINT "signal_map_tag_id_tags_id_fk" FOREIGN KEY ("tag_id") REFERENCES "public"."tags"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "sources" ADD CONSTRAINT "sources_plant_id_plants_id_fk" FOREIGN KEY ("plant_id") REFERENCES "public"."plants"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "tags" ADD CONSTRAINT "tags_plant_id_plants_id_fk" FOREIGN KEY ("plant_id") REFERENCES "public"."plants"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "tags" ADD CONSTRAINT "tags_source_id_sources_id_fk" FOREIGN KEY ("source_id") REFERENCES "public"."sources"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "alarms" ADD CONSTRAINT "alarms_plant_id_plants_id_fk" FOREIGN KEY ("plant_id") REFERENCES "public"."plants"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "balances" ADD CONSTRAINT "balances_plant_id_plants_id_fk" FOREIGN KEY ("plant_id") REFERENCES "public"."plants"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "lab_results" ADD CONSTRAINT "lab_results_plant_id_plants_id_fk" FOREIGN KEY ("plant_id") REFERENCES "public"."plants"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "tag_latest" ADD CONSTRAINT "tag_latest_tag_id_tags_id_fk" FOREIGN KEY ("tag_id") REFERENCES "public"."tags"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE UNIQUE INDEX "api_tokens_hash_uq" ON "api_tokens" USING btree ("token_hash");--> statement-breakpoint
CREATE INDEX "api_tokens_user_idx" ON "api_tokens" USING btree ("user_id");--> statement-breakpoint
CREATE INDEX "audit_log_ts_idx" ON "audit_log" USING btree ("ts");--> statement-breakpoint
CREATE UNIQUE INDEX "users_email_uq" ON "users" USING btree ("email");--> statement-breakpoint
CREATE UNIQUE INDEX "basins_train_code_uq" ON "basins" USING btree ("train_id","code");--> statement-breakpoint
CREATE UNIQUE INDEX "clarifiers_train_code_uq" ON "clarifiers" USING btree ("train_id","code");--> statement-breakpoint
CREATE UNIQUE INDEX "plants_code_uq" ON "plants" USING btree ("code");--> statement-breakpoint
CREATE UNIQUE INDEX "pumps_train_code_uq" ON "pumps" USING btree ("train_id","code");--> statement-breakpoint
CREATE UNIQUE INDEX "settings_plant_key_uq" ON "settings" USING btree ("plant_id","key");--> statement-breakpoint
CREATE INDEX "settings_key_idx" ON "settings" USING btree ("key");--> statement-breakpoint
CREATE UNIQUE INDEX "trains_plant_code_uq" ON "trains" USING btree ("plant_id","code");--> statement-breakpoint
CREATE INDEX "dead_letters_ts_idx" ON "dead_letters" USING btree ("ts");--> statement-breakpoint
CREATE UNIQUE INDEX "signal_map_target_uq" ON "signal_map" USING btree ("plant_id","signal","target_type","target_id");--> statement-breakpoint
CREATE INDEX "signal_map_tag_idx" ON "signal_map" USING btree ("tag_id");--> statement-breakpoint
CREATE UNIQUE INDEX "sources_plant_name_uq" ON "sources" USING btree ("plant_id","name");--> statement-breakpoint
CREATE UNIQUE INDEX "tags_plant_name_uq" ON "tags" USING btree ("plant_id","name");--> statement-breakpoint
CREATE UNIQUE INDEX "tags_source_address_uq" ON "tags" USING btree ("source_id","address");--> statement-breakpoint
CREATE INDEX "alarms_plant_state_idx" ON "alarms" USING btree ("plant_id","state");--> statement-breakpoint
CREATE INDEX "balances_plant_ts_idx" ON "balances" USING btree ("plant_id","ts");--> statement-breakpoint
CREATE INDEX "lab_results_plant_ts_idx" ON "lab_results" USING btree ("plant_id","sampled_at");