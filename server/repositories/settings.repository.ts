import { and, eq, inArray } from 'drizzle-orm';
import type { Db } from '../db/client.ts';
import { settings } from '../db/schema/index.ts';

/** Rows of the settings table: plantId 0 = global, a plant's own rows override them. */
export function settingsRepository(db: Db) {
  return {
    /** Rows for the global level and (when plantId ≠ 0) the plant. */
    async rowsFor(plantId: number) {
      return db
        .select({ plantId: settings.plantId, key: settings.key, value: settings.value })
        .from(settings)
        .where(inArray(settings.plantId, plantId === 0 ? [0] : [0, plantId]));
    },
    async upsert(plantId: number, key: string, value: unknown, userId: number | null) {
      await db
        .insert(settings)
        .values({ plantId, key, value, updatedBy: userId })
        .onConflictDoUpdate({ target: [settings.plantId, settings.key], set: { value, updatedBy: userId, updatedAt: new Date() } });
    },
    async remove(plantId: number, key: string) {
      await db.delete(settings).where(and(eq(settings.plantId, plantId), eq(settings.key, key)));
    },
  };
}
export type SettingsRepository = ReturnType<typeof settingsRepository>;
