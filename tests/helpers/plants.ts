import { services, type AppContext } from '../../server/app-context.ts';
import type { PlantConfigInput } from '../../shared/contracts/plant-config.ts';
import { kestrelBendConfig, type DemoEndpoints } from '../../simulators/plant/kestrel-bend.config.ts';

/** A plant from a configuration document, through the service behind POST /api/v1/plants (as `npm start` does). */
export function seedPlantConfig(ctx: AppContext, doc: PlantConfigInput): Promise<{ plantId: number; created: boolean }> {
  return services(ctx).plantConfig.ensure(null, doc);
}

/** The demo plant Kestrel Bend with its sources pointed at `ep`. */
export function seedDemoPlant(ctx: AppContext, ep: DemoEndpoints): Promise<{ plantId: number; created: boolean }> {
  return seedPlantConfig(ctx, kestrelBendConfig(ep));
}
