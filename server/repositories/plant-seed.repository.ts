import { and, eq } from 'drizzle-orm';
import type { PlantLayout } from '../../shared/contracts/plant-layout.ts';
import type { Db } from '../db/client.ts';
import { basins, clarifiers, plants, pumps, signalMap, sources, tags, trains } from '../db/schema/index.ts';

export interface SeedEndpoints {
  mqttUrl: string;
  opcuaUrl: string;
}

/** Writes a whole plant (layout, sources, tags, signal map) for the seeding service. */
export function plantSeedRepository(db: Db) {
  return {
    async idByCode(code: string): Promise<number | null> {
      const [existing] = await db.select({ id: plants.id }).from(plants).where(eq(plants.code, code));
      return existing?.id ?? null;
    },
    /**
     * The plant, its trains, basins, clarifiers and pumps, its two sources (`<code>-mqtt`,
     * `<code>-opcua`), tags and signal map, in one transaction; returns the plant id.
     */
    insertPlant(layout: PlantLayout, ep: SeedEndpoints): Promise<number> {
      return db.transaction(async (tx) => {
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
    },
    async setSourceUrl(plantId: number, name: string, url: string): Promise<void> {
      await db.update(sources).set({ url }).where(and(eq(sources.plantId, plantId), eq(sources.name, name)));
    },
  };
}
export type PlantSeedRepository = ReturnType<typeof plantSeedRepository>;
