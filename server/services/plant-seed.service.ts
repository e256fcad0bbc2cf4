import { and, eq } from 'drizzle-orm';
import { plantLayout, type PlantLayout } from '../../shared/contracts/plant-layout.ts';
import type { AppContext } from '../app-context.ts';
import { basins, clarifiers, plants, pumps, signalMap, sources, tags, trains } from '../db/schema/index.ts';
import { audit } from './audit.service.ts';

export interface SeedEndpoints {
  mqttUrl: string;
  opcuaUrl: string;
}

/**
 * Creates a plant with its layout, its two sources (MQTT broker, OPC UA endpoint), tags and
 * signal map, in one transaction. Idempotent: an existing plant with the same code is left as
 * it is (an integrator may have rewired it), so a restart never overwrites configuration.
 * Returns the plant id and whether it was created now.
 */
export async function seedPlant(ctx: AppContext, input: PlantLayout, ep: SeedEndpoints): Promise<{ plantId: number; created: boolean }> {
  const layout = plantLayout.parse(input);
  const db = ctx.db.db;
  const [existing] = await db.select({ id: plants.id }).from(plants).where(eq(plants.code, layout.code));
  if (existing) return { plantId: existing.id, created: false };

  const plantId = await db.transaction(async (tx) => {
    const [p] = await tx.insert(plants).values({ code: layout.code, name: layout.name, peakFlow_m3h: layout.peakFlow_m3h ?? null }).returning({ id: plants.id });
    const ids = new Map<string, { type: 'plant' | 'basin' | 'clarifier' | 'pump'; id: number }>([[layout.code, { type: 'plant', id: p!.id }]]);
    for (const t of layout.trains) {
      const [tr] = await tx.insert(trains).values({ plantId: p!.id, code: t.code, name: t.name }).returning({ id: trains.id });
      for (const b of t.basins) {
        const [r] = await tx.insert(basins).values({ trainId: tr!.id, ...b }).returning({ id: basins.id });
        ids.set(b.code, { type: 'basin', id: r!.id });
      }
      for (const c of t.clarifiers) {
        const [r] = await tx.insert(clarifiers).values({ trainId: tr!.id, ...c }).returning({ id: clarifiers.id });
        ids.set(c.code, { type: 'clarifier', id: r!.id });
      }
      for (const pu of t.pumps) {
        const [r] = await tx.insert(pumps).values({ trainId: tr!.id, code: pu.code, name: pu.name, kind: pu.kind, capacity_m3h: pu.capacity_m3h }).returning({ id: pumps.id });
        ids.set(pu.code, { type: 'pump', id: r!.id });
      }
    }
    const [mqttSrc] = await tx.insert(sources).values({ plantId: p!.id, name: `${layout.code}-mqtt`, kind: 'mqtt', url: ep.mqttUrl }).returning({ id: sources.id });
    const [opcSrc] = await tx.insert(sources).values({ plantId: p!.id, name: `${layout.code}-opcua`, kind: 'opcua', url: ep.opcuaUrl, options: { securityMode: 'None' } }).returning({ id: sources.id });
    for (const tg of layout.tags) {
      const [row] = await tx
        .insert(tags)
        .values({
          plantId: p!.id,
          sourceId: tg.protocol === 'mqtt' ? mqttSrc!.id : opcSrc!.id,
          name: tg.name,
          description: tg.description,
          address: tg.address,
          unit: tg.unit,
          rangeLow: tg.rangeLow,
          rangeHigh: tg.rangeHigh,
          expectedPeriod_s: tg.expectedPeriod_s,
          // One second: the simulator may run faster than real time, and the server's
          // data-change filter only reports changes anyway.
          samplingInterval_ms: tg.protocol === 'opcua' ? 1000 : null,
        })
        .returning({ id: tags.id });
      if (tg.signal) {
        const target = ids.get(tg.signal.target);
        if (!target) throw new Error(`tag ${tg.name}: signal target ${tg.signal.target} is not in the layout`);
        await tx.insert(signalMap).values({ plantId: p!.id, signal: tg.signal.kind, targetType: target.type, targetId: target.id, tagId: row!.id });
      }
    }
    return p!.id;
  });
  await audit(ctx, null, 'plant.seed', `plant:${plantId}`, { code: layout.code, tags: layout.tags.length });
  return { plantId, created: true };
}

/** Points the seeded sources at the endpoints of this run (the embedded broker's port may differ). */
export async function updateSeedEndpoints(ctx: AppContext, plantId: number, code: string, ep: SeedEndpoints): Promise<void> {
  const db = ctx.db.db;
  await db.update(sources).set({ url: ep.mqttUrl }).where(and(eq(sources.plantId, plantId), eq(sources.name, `${code}-mqtt`)));
  await db.update(sources).set({ url: ep.opcuaUrl }).where(and(eq(sources.plantId, plantId), eq(sources.name, `${code}-opcua`)));
}
