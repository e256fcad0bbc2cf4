CREATE TABLE "basin_versions" (
	"id" serial PRIMARY KEY NOT NULL,
	"basin_id" integer NOT NULL,
	"effective_from" timestamp with time zone NOT NULL,
	"volume_m3" double precision NOT NULL,
	"aerated_fraction" double precision NOT NULL,
	"side_water_depth_m" double precision,
	"in_service" boolean DEFAULT true NOT NULL
);
--> statement-breakpoint
CREATE TABLE "clarifier_versions" (
	"id" serial PRIMARY KEY NOT NULL,
	"clarifier_id" integer NOT NULL,
	"effective_from" timestamp with time zone NOT NULL,
	"area_m2" double precision NOT NULL,
	"side_water_depth_m" double precision NOT NULL,
	"feed_depth_m" double precision,
	"count" integer DEFAULT 1 NOT NULL,
	"in_service" boolean DEFAULT true NOT NULL
);
--> statement-breakpoint
CREATE TABLE "pump_versions" (
	"id" serial PRIMARY KEY NOT NULL,
	"pump_id" integer NOT NULL,
	"effective_from" timestamp with time zone NOT NULL,
	"capacity_m3h" double precision NOT NULL,
	"in_service" boolean DEFAULT true NOT NULL
);
--> statement-breakpoint
ALTER TABLE "plants" ADD COLUMN "unit_system" text DEFAULT 'SI' NOT NULL;--> statement-breakpoint
ALTER TABLE "plants" ADD COLUMN "retired_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "pumps" ADD COLUMN "clarifier_id" integer;--> statement-breakpoint
ALTER TABLE "basin_versions" ADD CONSTRAINT "basin_versions_basin_id_basins_id_fk" FOREIGN KEY ("basin_id") REFERENCES "public"."basins"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "clarifier_versions" ADD CONSTRAINT "clarifier_versions_clarifier_id_clarifiers_id_fk" FOREIGN KEY ("clarifier_id") REFERENCES "public"."clarifiers"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "pump_versions" ADD CONSTRAINT "pump_versions_pump_id_pumps_id_fk" FOREIGN KEY ("pump_id") REFERENCES "public"."pumps"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE UNIQUE INDEX "basin_versions_uq" ON "basin_versions" USING btree ("basin_id","effective_from");--> statement-breakpoint
CREATE UNIQUE INDEX "clarifier_versions_uq" ON "clarifier_versions" USING btree ("clarifier_id","effective_from");--> statement-breakpoint
CREATE UNIQUE INDEX "pump_versions_uq" ON "pump_versions" USING btree ("pump_id","effective_from");--> statement-breakpoint
ALTER TABLE "pumps" ADD CONSTRAINT "pumps_clarifier_id_clarifiers_id_fk" FOREIGN KEY ("clarifier_id") REFERENCES "public"."clarifiers"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
-- Existing units keep their geometry as their first version (which holds for all earlier times);
-- a basin's boolean aerobic becomes the aerated fraction 1 (aerobic) or 0 (not aerated).
INSERT INTO "basin_versions" ("basin_id", "effective_from", "volume_m3", "aerated_fraction", "in_service")
  SELECT b."id", p."created_at", b."volume_m3", CASE WHEN b."aerobic" THEN 1 ELSE 0 END, true
  FROM "basins" b JOIN "trains" t ON t."id" = b."train_id" JOIN "plants" p ON p."id" = t."plant_id";--> statement-breakpoint
INSERT INTO "clarifier_versions" ("clarifier_id", "effective_from", "area_m2", "side_water_depth_m", "count", "in_service")
  SELECT c."id", p."created_at", c."area_m2", c."side_water_depth_m", c."count", true
  FROM "clarifiers" c JOIN "trains" t ON t."id" = c."train_id" JOIN "plants" p ON p."id" = t."plant_id";--> statement-breakpoint
INSERT INTO "pump_versions" ("pump_id", "effective_from", "capacity_m3h", "in_service")
  SELECT x."id", p."created_at", x."capacity_m3h", true
  FROM "pumps" x JOIN "trains" t ON t."id" = x."train_id" JOIN "plants" p ON p."id" = t."plant_id";
