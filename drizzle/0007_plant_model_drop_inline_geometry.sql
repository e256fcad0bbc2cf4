ALTER TABLE "basins" DROP COLUMN "volume_m3";--> statement-breakpoint
ALTER TABLE "basins" DROP COLUMN "aerobic";--> statement-breakpoint
ALTER TABLE "clarifiers" DROP COLUMN "area_m2";--> statement-breakpoint
ALTER TABLE "clarifiers" DROP COLUMN "side_water_depth_m";--> statement-breakpoint
ALTER TABLE "clarifiers" DROP COLUMN "count";--> statement-breakpoint
ALTER TABLE "pumps" DROP COLUMN "capacity_m3h";