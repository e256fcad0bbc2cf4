import { plantLayout, type PlantLayout } from '../../shared/contracts/plant-layout.ts';
import { services, type AppContext } from '../app-context.ts';
import type { PlantSeedRepository, SeedEndpoints } from '../repositories/plant-seed.repository.ts';
import type { AuditLog } from './audit.service.ts';

export type { SeedEndpoints } from '../repositories/plant-seed.repository.ts';

export interface PlantSeedServiceDeps {
  seedRepo: Pick<PlantSeedRepository, 'idByCode' | 'insertPlant' | 'setSourceUrl'>;
  audit: AuditLog;
}

export function createPlantSeedService({ seedRepo, audit }: PlantSeedServiceDeps) {
  return {
    /**
     * Creates a plant with its layout, its two sources (MQTT broker, OPC UA endpoint), tags and
     * signal map, in one transaction. Idempotent: an existing plant with the same code is left as
     * it is (an integrator may have rewired it), so a restart never overwrites configuration.
     * Returns the plant id and whether it was created now.
     */
    async seed(input: PlantLayout, ep: SeedEndpoints): Promise<{ plantId: number; created: boolean }> {
      const layout = plantLayout.parse(input);
      const existing = await seedRepo.idByCode(layout.code);
      if (existing !== null) return { plantId: existing, created: false };
      const plantId = await seedRepo.insertPlant(layout, ep);
      await audit.record(null, 'plant.seed', `plant:${plantId}`, { code: layout.code, tags: layout.tags.length });
      return { plantId, created: true };
    },
    /** Points the seeded sources at the endpoints of this run (the embedded broker's port may differ). */
    async updateEndpoints(plantId: number, code: string, ep: SeedEndpoints): Promise<void> {
      await seedRepo.setSourceUrl(plantId, `${code}-mqtt`, ep.mqttUrl);
      await seedRepo.setSourceUrl(plantId, `${code}-opcua`, ep.opcuaUrl);
    },
  };
}

/** `services(ctx).plantSeed.seed(…)` for the launcher and tests. */
export function seedPlant(ctx: AppContext, input: PlantLayout, ep: SeedEndpoints): Promise<{ plantId: number; created: boolean }> {
  return services(ctx).plantSeed.seed(input, ep);
}

/** `services(ctx).plantSeed.updateEndpoints(…)` for the launcher. */
export function updateSeedEndpoints(ctx: AppContext, plantId: number, code: string, ep: SeedEndpoints): Promise<void> {
  return services(ctx).plantSeed.updateEndpoints(plantId, code, ep);
}
