import {
  defaultSettings,
  SETTING_KEYS,
  SETTINGS,
  type EffectiveSettings,
  type PutSettingsRequest,
  type SettingKey,
  type SettingsOut,
} from '../../shared/contracts/settings.ts';
import type { Principal } from '../auth/principal.ts';
import { ForbiddenError, NotFoundError } from '../http/errors.ts';
import type { PlantRepository } from '../repositories/plant.repository.ts';
import type { SettingsRepository } from '../repositories/settings.repository.ts';
import type { Actor, AuditLog } from './audit.service.ts';
import { assertPlantScope } from './plant.service.ts';

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

export interface SettingsServiceDeps {
  settingsRepo: Pick<SettingsRepository, 'rowsFor' | 'upsert' | 'remove'>;
  plantRepo: Pick<PlantRepository, 'byId'>;
  audit: AuditLog;
}

/**
 * Plant scope of settings (issue 15): a plant-scoped caller reads and writes only its own plants'
 * levels. The global level (plantId 0) sets every plant that does not override a key, and holds
 * the global mail recipients, so it is outside every plant scope: 403. Checked before existence,
 * so a scope does not reveal which plants exist. `null` is the system (scripts, tests).
 */
function assertSettingsScope(principal: Principal | null, plantId: number): void {
  if (!principal?.plantIds) return;
  if (plantId === 0) throw new ForbiddenError('this token is scoped to some plants; the global settings (plantId 0) apply to every plant');
  assertPlantScope(principal, plantId);
}

export function createSettingsService({ settingsRepo, plantRepo, audit }: SettingsServiceDeps) {
  const assertPlant = async (principal: Principal | null, plantId: number) => {
    assertSettingsScope(principal, plantId);
    if (plantId === 0) return;
    if (!(await plantRepo.byId(plantId))) throw new NotFoundError(`no plant ${plantId}`);
  };
  /** The settings of one level with defaults and sources; `principal` null: the system. */
  async function describe(principal: Principal | null, plantId: number): Promise<SettingsOut> {
    await assertPlant(principal, plantId);
    const { values, source } = resolveSettings(await settingsRepo.rowsFor(plantId), plantId);
    return {
      plantId,
      settings: SETTING_KEYS.map((key) => ({ key, value: values[key], default: SETTINGS[key].default, source: source[key]!, unit: SETTINGS[key].unit, doc: SETTINGS[key].doc })),
    };
  }
  return {
    /** Effective settings for a plant (0 = the global level). */
    async effective(plantId: number): Promise<EffectiveSettings> {
      return resolveSettings(await settingsRepo.rowsFor(plantId), plantId).values;
    },
    describe,
    /** Stores (or with null removes) values for one level; audited with old and new values. `principal` null: the system (scripts, tests). */
    async put(principal: Actor | null, body: PutSettingsRequest): Promise<SettingsOut> {
      await assertPlant(principal, body.plantId);
      const before = resolveSettings(await settingsRepo.rowsFor(body.plantId), body.plantId).values as Record<string, unknown>;
      const changes: Record<string, { from: unknown; to: unknown }> = {};
      for (const [key, value] of Object.entries(body.values)) {
        if (value === null) await settingsRepo.remove(body.plantId, key);
        else await settingsRepo.upsert(body.plantId, key, SETTINGS[key as SettingKey].schema.parse(value), principal?.userId ?? null);
        changes[key] = { from: before[key], to: value };
      }
      await audit.record(principal, 'settings.update', `plant:${body.plantId}`, { changes });
      return describe(principal, body.plantId);
    },
  };
}
export type SettingsService = ReturnType<typeof createSettingsService>;
