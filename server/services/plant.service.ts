import type {
  AlarmOut,
  AlarmsQuery,
  BalanceHistoryQuery,
  BalanceHistoryRow,
  BalanceOut,
  PlantLayoutOut,
  PlantSummary,
  TagLive,
} from '../../shared/contracts/plant-api.ts';
import { MAX_POINTS } from '../../shared/contracts/plant-api.ts';
import { qualityFlags, qualityGrade } from '../../shared/contracts/sample-quality.ts';
import type { Clock } from '../app-context.ts';
import type { Principal } from '../auth/principal.ts';
import { isNum, isStr, type CursorCodec } from '../http/csv.ts';
import { BadRequestError, ForbiddenError, NotFoundError } from '../http/errors.ts';
import type { AlarmRow, BalanceRow, PlantRepository, PlantRow } from '../repositories/plant.repository.ts';

const DAY_MS = 86_400_000;
/** A tag is stale when its latest value is older than this many expected periods. */
export const STALE_PERIODS = 3;
const QUALITY_NAMES = ['good', 'estimated', 'unavailable'] as const;

function summary(p: PlantRow): PlantSummary {
  return { id: p.id, code: p.code, name: p.name, timezone: p.timezone, peakFlow_m3h: p.peakFlow_m3h, unitSystem: p.unitSystem, retiredAt: p.retiredAt?.toISOString() ?? null, createdAt: p.createdAt.toISOString() };
}

export function balanceOut(b: BalanceRow): BalanceOut {
  return { id: b.id, ts: b.ts.toISOString(), quality: b.quality, data: b.data as Record<string, unknown>, inputs: b.inputs as Record<string, unknown> };
}

export function alarmOut(a: AlarmRow): AlarmOut {
  return {
    id: a.id,
    rule: a.rule,
    target: a.target,
    priority: a.priority,
    state: a.state,
    message: a.message,
    value: a.value,
    limit: a.limit,
    raisedAt: a.raisedAt.toISOString(),
    acknowledgedAt: a.acknowledgedAt?.toISOString() ?? null,
    acknowledgedBy: a.acknowledgedBy,
    clearedAt: a.clearedAt?.toISOString() ?? null,
    suppressedReason: a.suppressedReason,
    shelvedUntil: a.shelvedUntil?.toISOString() ?? null,
    shelveReason: a.shelveReason,
  };
}

const isTsIdCursor = (o: Record<string, unknown>): o is { ts: string; id: number; p: number } => isStr(o.ts) && isNum(o.id) && isNum(o.p);
const isBalanceCursor = (o: Record<string, unknown>): o is { p: number; f: number; t: number; s: number; a: number } => isNum(o.p) && isNum(o.f) && isNum(o.t) && isNum(o.s) && isNum(o.a);

/** 403 when a plant-scoped token asks for a plant outside its scope. */
export function assertPlantScope(principal: Principal, plantId: number): void {
  const scope = principal.plantIds;
  if (scope && !scope.includes(plantId)) throw new ForbiddenError(`this token is not scoped to plant ${plantId}`);
}

/** The gate every plant read and write goes through. */
export interface PlantAccess {
  /** 403 for a plant outside a scoped token (before existence, so scopes do not reveal plants), then 404. */
  requirePlant(principal: Principal, plantId: number): Promise<PlantRow>;
}

export function createPlantAccess({ plantRepo }: { plantRepo: Pick<PlantRepository, 'byId'> }): PlantAccess {
  return {
    async requirePlant(principal, plantId) {
      assertPlantScope(principal, plantId);
      const p = await plantRepo.byId(plantId);
      if (!p) throw new NotFoundError(`no plant ${plantId}`);
      return p;
    },
  };
}

export interface PlantServiceDeps {
  plantRepo: Pick<PlantRepository, 'list' | 'layout' | 'liveTags' | 'latestBalance' | 'balanceBuckets' | 'alarms'>;
  plantAccess: PlantAccess;
  clock: Clock;
  /** The deployment's paging cursors (server/http/csv.ts). */
  cursors: CursorCodec;
}

/** Plants, layout, live tags, balances, alarms. Every plant read goes through `requirePlant`. */
export function createPlantService({ plantRepo: repo, plantAccess, clock, cursors }: PlantServiceDeps) {
  const requirePlant = plantAccess.requirePlant;
  return {
    async list(principal: Principal): Promise<PlantSummary[]> {
      return (await repo.list(principal.plantIds)).map(summary);
    },

    async layout(principal: Principal, plantId: number): Promise<PlantLayoutOut> {
      const p = await requirePlant(principal, plantId);
      const l = await repo.layout(plantId);
      return {
        ...summary(p),
        trains: l.trains.map((t) => ({
          id: t.id,
          code: t.code,
          name: t.name,
          // Units out of service now are not part of the plant's current layout.
          basins: l.basins.filter((b) => b.trainId === t.id && b.inService).map(({ id, code, name, volume_m3, aeratedFraction, sideWaterDepth_m }) => ({ id, code, name, volume_m3, aeratedFraction, sideWaterDepth_m })),
          clarifiers: l.clarifiers.filter((c) => c.trainId === t.id && c.inService).map(({ id, code, name, area_m2, sideWaterDepth_m, feedDepth_m, count }) => ({ id, code, name, area_m2, sideWaterDepth_m, feedDepth_m, count })),
          pumps: l.pumps.filter((x) => x.trainId === t.id && x.inService).map(({ id, code, name, kind, capacity_m3h, clarifierId }) => ({ id, code, name, kind, capacity_m3h, clarifierId })),
        })),
      };
    },

    async tags(principal: Principal, plantId: number): Promise<{ plantId: number; asOf: string; tags: TagLive[] }> {
      await requirePlant(principal, plantId);
      const rows = await repo.liveTags(plantId);
      const now = clock();
      // A plant's tags share few quality codes: each is decoded once per answer.
      const qualities = new Map<number, NonNullable<TagLive['quality']>>();
      const qualityOf = (code: number) => {
        let q = qualities.get(code);
        if (!q) qualities.set(code, (q = { code, grade: qualityGrade(code), flags: qualityFlags(code) }));
        return q;
      };
      return {
        plantId,
        asOf: new Date(now).toISOString(),
        tags: rows.map(([id, name, description, unit, enabled, expectedPeriod_s, sourceId, sourceName, sourceKind, ts_ms, value, quality, signals]) => {
          const age_s = ts_ms === null ? null : (now - ts_ms) / 1000;
          return {
            id,
            name,
            description,
            unit,
            enabled,
            expectedPeriod_s,
            source: { id: sourceId, name: sourceName, kind: sourceKind },
            signals: signals.map(([signal, targetType, targetId, targetCode]) => ({ signal, targetType, targetId, targetCode })),
            value,
            ts: ts_ms === null ? null : new Date(ts_ms).toISOString(),
            age_s,
            stale: age_s === null || age_s > STALE_PERIODS * expectedPeriod_s,
            quality: quality === null ? null : qualityOf(quality),
          };
        }),
      };
    },

    /** The latest balance; `balance: null` with a reason (still 200) when the engine has not computed one yet. */
    async balanceLive(principal: Principal, plantId: number) {
      await requirePlant(principal, plantId);
      const b = await repo.latestBalance(plantId);
      if (!b) return { plantId, balance: null, age_s: null, reason: 'no balance has been computed for this plant yet' };
      return { plantId, balance: balanceOut(b), age_s: (clock() - b.ts.getTime()) / 1000 };
    },

    /**
     * Balances bucketed by step (each bucket reports its last computation, how many there were and
     * the worst quality among them), ascending. The step is raised so the window has ≤ 2000 buckets.
     */
    async balanceHistory(principal: Principal, plantId: number, q: BalanceHistoryQuery, limit: number) {
      await requirePlant(principal, plantId);
      let from: number, to: number, step_s: number, after: number | null;
      if (q.cursor) {
        const c = cursors.decode('balance-history', q.cursor, isBalanceCursor);
        if (c.p !== plantId) throw new BadRequestError('the cursor belongs to another plant');
        if ((q.from && Date.parse(q.from) !== c.f) || (q.to && Date.parse(q.to) !== c.t)) throw new BadRequestError('from and to must be those of the query the cursor came from (or be left out)');
        ({ f: from, t: to, s: step_s, a: after } = c);
      } else {
        to = q.to ? Date.parse(q.to) : clock();
        from = q.from ? Date.parse(q.from) : to - DAY_MS;
        step_s = Math.max(q.step ?? 1, Math.ceil((to - from) / 1000 / MAX_POINTS));
        after = null;
      }
      const stepMs = step_s * 1000;
      const lo = Math.floor(from / stepMs) * stepMs;
      const hi = Math.ceil(to / stepMs) * stepMs;
      const rows = await repo.balanceBuckets(plantId, new Date(after ?? lo), new Date(hi), step_s, limit + 1);
      const more = rows.length > limit;
      const page = more ? rows.slice(0, limit) : rows;
      const out: BalanceHistoryRow[] = page.map((r) => ({
        bucket: r.bucket.toISOString(),
        id: r.id,
        ts: r.ts.toISOString(),
        quality: r.quality,
        worstQuality: QUALITY_NAMES[r.worst] ?? 'unavailable',
        computations: r.computations,
        data: r.data,
      }));
      const last = page[page.length - 1];
      const nextCursor = more && last ? cursors.encode('balance-history', { p: plantId, f: from, t: to, s: step_s, a: last.bucket.getTime() + stepMs }) : null;
      return { plantId, from: new Date(lo).toISOString(), to: new Date(hi).toISOString(), step_s, rows: out, nextCursor };
    },

    async alarms(principal: Principal, plantId: number, q: AlarmsQuery, limit: number) {
      await requirePlant(principal, plantId);
      const before = q.cursor ? cursors.decode('alarms', q.cursor, isTsIdCursor) : undefined;
      if (before && before.p !== plantId) throw new BadRequestError('the cursor belongs to another plant');
      const rows = await repo.alarms(plantId, { state: q.state, from: q.from ? new Date(q.from) : undefined, to: q.to ? new Date(q.to) : undefined, before }, limit + 1);
      const more = rows.length > limit;
      const page = more ? rows.slice(0, limit) : rows;
      const last = page[page.length - 1];
      return { plantId, alarms: page.map(alarmOut), nextCursor: more && last ? cursors.encode('alarms', { p: plantId, ts: last.cursorTs, id: last.id }) : null };
    },
  };
}
export type PlantService = ReturnType<typeof createPlantService>;

export const ALARM_CSV_COLUMNS = ['id', 'rule', 'target', 'priority', 'state', 'message', 'value', 'limit', 'raisedAt', 'acknowledgedAt', 'acknowledgedBy', 'clearedAt'] as const;
