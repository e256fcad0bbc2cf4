import type { Request } from 'express';
import { eq } from 'drizzle-orm';
import {
  defaultSettings,
  SETTING_KEYS,
  SETTINGS,
  type EffectiveSettings,
  type PutSettingsRequest,
  type SettingKey,
  type SettingsOut,
} from '../../shared/contracts/settings.ts';
import type { AppContext } from '../app-context.ts';
import { plants } from '../db/schema/index.ts';
import { NotFoundError } from '../http/errors.ts';
import { settingsRepository } from '../repositories/settings.repository.ts';
import { audit } from './audit.service.ts';

/**
 * Settings with their precedence: the plant's own value, else the global (plantId 0) value,
 * else the default of shared/contracts/settings.ts. A stored value that no longer passes its
 * schema (the contract changed) is ignored in favour of the next level, never used half-valid.
 */
export function resolveSettings(rows: { plantId: number; key: string; value: unknown }[], plantId: number) {
  const eff = defaultSettings() as Record<string, unknown>;
  const source: Record<string, 'default' | 'global' | 'plant'> = Object.fromEntries(SETTING_KEYS.map((k) => [k, 'default']));
  for (const level of plantId === 0 ? [0] : [0, plantId]) {
    for (const r of rows) {
      if (r.plantId !== level || !(r.key in SETTINGS)) continue;
      const parsed = SETTINGS[r.key as SettingKey].schema.safeParse(r.value);
      if (!parsed.success) continue;
      eff[r.key] = parsed.data;
      source[r.key] = level === 0 ? 'global' : 'plant';
    }
  }
  return { values: eff as EffectiveSettings, source };
}

export function settingsService(ctx: AppContext) {
  const repo = settingsRepository(ctx.db.db);
  const assertPlant = async (plantId: number) => {
    if (plantId === 0) return;
    const [p] = await ctx.db.db.select({ id: plants.id }).from(plants).where(eq(plants.id, plantId));
    if (!p) throw new NotFoundError(`no plant ${plantId}`);
  };
  return {
    /** Effective settings for a plant (0 = the global level). */
    async effective(plantId: number): Promise<EffectiveSettings> {
      return resolveSettings(await repo.rowsFor(plantId), plantId).values;
    },
    async describe(plantId: number): Promise<SettingsOut> {
      await assertPlant(plantId);
      const { values, source } = resolveSettings(await repo.rowsFor(plantId), plantId);
      return {
        plantId,
        settings: SETTING_KEYS.map((key) => ({ key, value: values[key], default: SETTINGS[key].default, source: source[key]!, unit: SETTINGS[key].unit, doc: SETTINGS[key].doc })),
      };
    },
    /** Stores (or with null removes) values for one level; audited with old and new values. */
    async put(req: Request | null, body: PutSettingsRequest): Promise<SettingsOut> {
      await assertPlant(body.plantId);
      const before = resolveSettings(await repo.rowsFor(body.plantId), body.plantId).values as Record<string, unknown>;
      const changes: Record<string, { from: unknown; to: unknown }> = {};
      for (const [key, value] of Object.entries(body.values)) {
        if (value === null) await repo.remove(body.plantId, key);
        else await repo.upsert(body.plantId, key, SETTINGS[key as SettingKey].schema.parse(value), req?.principal?.userId ?? null);
        changes[key] = { from: before[key], to: value };
      }
      await audit(ctx, req, 'settings.update', `plant:${body.plantId}`, { changes });
      return this.describe(body.plantId);
    },
  };
}
export type SettingsService = ReturnType<typeof settingsService>;
