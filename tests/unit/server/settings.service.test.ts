import { describe, expect, it } from 'vitest';
import { SETTINGS } from '../../../shared/contracts/settings.ts';
import { ForbiddenError, NotFoundError } from '../../../server/http/errors.ts';
import type { PlantRow } from '../../../server/repositories/plant.repository.ts';
import { createSettingsService } from '../../../server/services/settings.service.ts';
import { admin, fakeAudit, scopedToken } from './service-fakes.ts';

type Row = { plantId: number; key: string; value: unknown; updatedBy: number | null };

/** The settings table in memory, keyed by (plantId, key) as its primary key is. */
function fakeSettingsRepo(initial: Row[] = []) {
  const rows = new Map(initial.map((r) => [`${r.plantId}|${r.key}`, r]));
  return {
    rows,
    async rowsFor(plantId: number) {
      return [...rows.values()].filter((r) => r.plantId === 0 || r.plantId === plantId).map(({ plantId: p, key, value }) => ({ plantId: p, key, value }));
    },
    async upsert(plantId: number, key: string, value: unknown, userId: number | null) {
      rows.set(`${plantId}|${key}`, { plantId, key, value, updatedBy: userId });
    },
    async remove(plantId: number, key: string) {
      rows.delete(`${plantId}|${key}`);
    },
  };
}
const plantRepo = {
  async byId(id: number): Promise<PlantRow | undefined> {
    return id === 1 ? { id: 1, code: 'kb', name: 'Kestrel Bend', timezone: 'UTC', peakFlow_m3h: null, unitSystem: 'SI', retiredAt: null, createdAt: new Date(0) } : undefined;
  },
};

describe('settings service with fake repositories (no HTTP, no database)', () => {
  it('precedence: plant value over global value over the default; describe names where each comes from', async () => {
    const settingsRepo = fakeSettingsRepo([
      { plantId: 0, key: 'srt.target_d', value: 12, updatedBy: 1 },
      { plantId: 0, key: 'alarm.on_delay_s', value: 30, updatedBy: 1 },
      { plantId: 1, key: 'alarm.on_delay_s', value: 0, updatedBy: 1 },
    ]);
    const svc = createSettingsService({ settingsRepo, plantRepo, audit: fakeAudit() });
    const eff = await svc.effective(1);
    expect(eff['srt.target_d']).toBe(12);
    expect(eff['alarm.on_delay_s']).toBe(0);
    expect(eff['srt.window_h']).toBe(SETTINGS['srt.window_h'].default);
    const d = await svc.describe(null, 1);
    const src = Object.fromEntries(d.settings.map((s) => [s.key, s.source]));
    expect([src['srt.target_d'], src['alarm.on_delay_s'], src['srt.window_h']]).toEqual(['global', 'plant', 'default']);
    expect((await svc.effective(0))['alarm.on_delay_s']).toBe(30);
  });

  it('a stored value that no longer passes its schema falls through to the next level, never used half-valid', async () => {
    const settingsRepo = fakeSettingsRepo([
      { plantId: 0, key: 'srt.target_d', value: 12, updatedBy: 1 },
      { plantId: 1, key: 'srt.target_d', value: -3, updatedBy: 1 },
    ]);
    const svc = createSettingsService({ settingsRepo, plantRepo, audit: fakeAudit() });
    expect((await svc.effective(1))['srt.target_d']).toBe(12);
  });

  it('put stores, removes with null, records who changed what from what to what, and answers the new state', async () => {
    const settingsRepo = fakeSettingsRepo([{ plantId: 1, key: 'srt.target_d', value: 8, updatedBy: 1 }]);
    const audit = fakeAudit();
    const svc = createSettingsService({ settingsRepo, plantRepo, audit });
    const out = await svc.put(admin, { plantId: 1, values: { 'alarm.on_delay_s': 120, 'srt.target_d': null } });
    expect(settingsRepo.rows.get('1|alarm.on_delay_s')).toEqual({ plantId: 1, key: 'alarm.on_delay_s', value: 120, updatedBy: admin.userId });
    expect(settingsRepo.rows.has('1|srt.target_d')).toBe(false);
    expect(out.settings.find((s) => s.key === 'srt.target_d')).toMatchObject({ value: SETTINGS['srt.target_d'].default, source: 'default' });
    expect(audit.entries).toEqual([
      {
        actor: admin,
        action: 'settings.update',
        target: 'plant:1',
        details: { changes: { 'alarm.on_delay_s': { from: SETTINGS['alarm.on_delay_s'].default, to: 120 }, 'srt.target_d': { from: 8, to: null } } },
      },
    ]);
  });

  it('an unknown plant is 404 before anything is written; the system (null principal) may write the global level', async () => {
    const settingsRepo = fakeSettingsRepo();
    const audit = fakeAudit();
    const svc = createSettingsService({ settingsRepo, plantRepo, audit });
    await expect(svc.put(admin, { plantId: 9, values: { 'srt.target_d': 9 } })).rejects.toBeInstanceOf(NotFoundError);
    expect(settingsRepo.rows.size).toBe(0);
    await svc.put(null, { plantId: 0, values: { 'srt.target_d': 9 } });
    expect(settingsRepo.rows.get('0|srt.target_d')?.updatedBy).toBeNull();
    expect(audit.entries[0]?.actor).toBeNull();
  });

  it('a plant-scoped token reads and writes only its own plants: another plant and the global level are 403, nothing written', async () => {
    const settingsRepo = fakeSettingsRepo([{ plantId: 0, key: 'mail.recipients', value: ['chief@kestrel.invalid'], updatedBy: 1 }]);
    const audit = fakeAudit();
    const svc = createSettingsService({ settingsRepo, plantRepo, audit });
    const scopedAdmin = { ...scopedToken, role: 'admin' as const }; // scoped to plant 2 only
    await expect(svc.describe(scopedAdmin, 1)).rejects.toBeInstanceOf(ForbiddenError);
    await expect(svc.describe(scopedAdmin, 0)).rejects.toBeInstanceOf(ForbiddenError);
    await expect(svc.put(scopedAdmin, { plantId: 1, values: { 'alarm.on_delay_s': 0 } })).rejects.toBeInstanceOf(ForbiddenError);
    await expect(svc.put(scopedAdmin, { plantId: 0, values: { 'mail.recipients': ['x@evil.invalid'] } })).rejects.toBeInstanceOf(ForbiddenError);
    expect(settingsRepo.rows.size).toBe(1);
    expect(audit.entries).toEqual([]);
    // Its own plant 2 passes the scope check and is then judged on existence (the fake knows only plant 1).
    await expect(svc.describe(scopedAdmin, 2)).rejects.toBeInstanceOf(NotFoundError);
  });
});
