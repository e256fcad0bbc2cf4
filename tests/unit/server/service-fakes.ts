import type { Principal } from '../../../server/auth/principal.ts';
import type { AuditActor, AuditLog } from '../../../server/services/audit.service.ts';
import type { PlantAccess } from '../../../server/services/plant.service.ts';
import { assertPlantScope } from '../../../server/services/plant.service.ts';
import { NotFoundError } from '../../../server/http/errors.ts';
import type { PlantRow } from '../../../server/repositories/plant.repository.ts';

/** Fakes shared by the service unit tests: no HTTP, no database. */

export const operator: Principal & { ip: string } = { userId: 7, email: 'op@kestrel.invalid', role: 'operator', tokenId: null, plantIds: null, ip: '203.0.113.9' };
export const admin: Principal & { ip: string } = { userId: 1, email: 'chief@kestrel.invalid', role: 'admin', tokenId: null, plantIds: null, ip: '203.0.113.1' };
/** A token scoped to plant 2 only. */
export const scopedToken: Principal = { userId: 7, email: 'op@kestrel.invalid', role: 'operator', tokenId: 42, plantIds: [2] };

export interface AuditEntry {
  actor: AuditActor;
  action: string;
  target: string | null;
  details?: Record<string, unknown>;
}

/** An audit log that keeps its entries in an array. */
export function fakeAudit(): AuditLog & { entries: AuditEntry[] } {
  const entries: AuditEntry[] = [];
  return {
    entries,
    async record(actor, action, target, details) {
      entries.push({ actor, action, target, details });
    },
  };
}

/** Plant access over a fixed set of plant ids (scope checked as the product does). */
export function fakePlantAccess(ids: number[]): PlantAccess {
  return {
    async requirePlant(principal, plantId) {
      assertPlantScope(principal, plantId);
      if (!ids.includes(plantId)) throw new NotFoundError(`no plant ${plantId}`);
      const row: PlantRow = { id: plantId, code: `p${plantId}`, name: `Plant ${plantId}`, timezone: 'UTC', peakFlow_m3h: null, unitSystem: 'SI', retiredAt: null, createdAt: new Date(0) };
      return row;
    },
  };
}

/** A clock the test sets. */
export function fakeClock(start_ms: number) {
  let now = start_ms;
  const clock = () => now;
  return Object.assign(clock, { set: (ms: number) => void (now = ms), advance: (ms: number) => void (now += ms) });
}
