import type { Response } from 'express';
import { z } from 'zod';
import {
  alarmsQuery,
  alarmsResponse,
  balanceHistoryQuery,
  balanceHistoryResponse,
  balanceLiveResponse,
  plantLayoutOut,
  plantParams,
  plantSummary,
  samplesQuery,
  samplesResponse,
  tableQuery,
  tagParams,
  tagsResponse,
} from '../../shared/contracts/plant-api.ts';
import { services, type AppContext, type ReadServices } from '../app-context.ts';
import { sendCsv, setNextPage, wantsCsv } from '../http/csv.ts';
import { defineRoute, type RouteDef, type RoutePrincipal } from '../http/route.ts';
import { displayColumns, flattenRows, sampleCsv } from '../services/csv.service.ts';
import { ALARM_CSV_COLUMNS, assertPlantScope } from '../services/plant.service.ts';
import { liveBalanceCache } from '../services/live-balance-cache.ts';
import { READ_SOURCE_HEADER } from '../services/read-routing.service.ts';

const DEFAULT_LIST_LIMIT = 500;
const DEFAULT_HISTORY_LIMIT = 5000;

/**
 * Read API of a plant: layout, live tags, tag history, balances, alarms. Any signed-in role or
 * token (analyst and up); a plant-scoped token gets 403 for other plants, an unknown plant is 404.
 * Table routes answer CSV too (`?format=csv` or `Accept: text/csv`); list routes page with
 * `cursor` + `limit` (nextCursor in the JSON body, `Link: rel="next"` and `X-Next-Cursor` headers).
 * Tag history, balance history and every CSV export read the replica when DATABASE_READ_URL is
 * set (`services(ctx).reads.pick`, read-your-writes), the rest the primary; those routes say
 * which in the `x-flocstream-read` header.
 */
export function plantsRoutes(ctx: AppContext): RouteDef[] {
  const { plants, reads } = services(ctx);
  const live = liveBalanceCache(ctx);
  const common = { role: 'analyst' as const, tag: 'plants' };
  /**
   * One answer's read and the header saying which database gave it: the read routing's choice
   * (replica or primary, the primary again when the replica cannot be reached) when `routed`,
   * else the primary.
   */
  const readVia = async <T>(principal: RoutePrincipal, res: Response, routed: boolean, read: (r: ReadServices) => Promise<T>): Promise<T> => {
    const { out, source } = routed ? await reads.run(principal, read) : { out: await read(reads.primary), source: reads.primary.source };
    res.setHeader(READ_SOURCE_HEADER, source);
    return out;
  };
  return [
    defineRoute({
      ...common,
      method: 'get',
      path: '/plants',
      summary: 'Plants the caller may read (a plant-scoped token sees its plants only)',
      query: tableQuery,
      csv: true,
      response: z.array(plantSummary),
      handler: async ({ principal, req, res }) => {
        const list = await readVia(principal, res, wantsCsv(req), (r) => r.plants.list(principal));
        if (!wantsCsv(req)) return list;
        sendCsv(res, 'plants.csv', ['id', 'code', 'name', 'timezone', 'peakFlow_m3h', 'createdAt'], list.map((p) => [p.id, p.code, p.name, p.timezone, p.peakFlow_m3h, p.createdAt]));
      },
    }),
    defineRoute({
      ...common,
      method: 'get',
      path: '/plants/:plantId',
      summary: 'A plant and its layout: trains with basins, clarifiers and pumps; peak flow',
      params: plantParams,
      response: plantLayoutOut,
      handler: ({ params, principal }) => plants.layout(principal, params.plantId),
    }),
    defineRoute({
      ...common,
      method: 'get',
      path: '/plants/:plantId/tags',
      summary: 'Tags with their latest value, quality (grade and flags), age, unit, source kind and signal mapping; stale = older than 3 expected periods',
      params: plantParams,
      query: tableQuery,
      csv: true,
      response: tagsResponse,
      handler: async ({ params, principal, req, res }) => {
        const out = await readVia(principal, res, wantsCsv(req), (r) => r.plants.tags(principal, params.plantId));
        if (!wantsCsv(req)) return out;
        const cols = ['id', 'name', 'unit', 'value', 'ts', 'age_s', 'stale', 'quality', 'qualityCode', 'qualityFlags', 'sourceKind', 'sourceName', 'signals', 'expectedPeriod_s', 'enabled', 'description'];
        sendCsv(
          res,
          `plant-${out.plantId}-tags.csv`,
          cols,
          out.tags.map((t) => [
            t.id, t.name, t.unit, t.value, t.ts, t.age_s, t.stale, t.quality?.grade, t.quality?.code, t.quality?.flags.join(';'), t.source.kind, t.source.name,
            t.signals.map((s) => `${s.signal}@${s.targetCode ?? `${s.targetType}:${s.targetId}`}`).join(';'), t.expectedPeriod_s, t.enabled, t.description,
          ]),
        );
      },
    }),
    defineRoute({
      ...common,
      method: 'get',
      path: '/plants/:plantId/tags/:tagId/samples',
      summary:
        'Tag history over [from, to) (default the last hour): raw samples, or buckets from raw, rollup_1m or rollup_1h chosen so that at most ~2000 points return (without a step, a window of 500 min to 2000 min comes at 1 min and one of 500 h to 2000 h at 1 h, straight from the rollup); agg mean|min|max|last; empty buckets are left out (gaps stay gaps); bad or value-less samples are not aggregated (as in the rollups)',
      params: tagParams,
      query: samplesQuery,
      csv: true,
      response: samplesResponse,
      handler: async ({ params: { plantId, tagId }, query, principal, req, res }) => {
        // The plant (its unit system, for CSV) comes from the same database as the samples.
        const [out, plant] = await readVia(principal, res, true, async (r) => [await r.series.samples(principal, plantId, tagId, query), wantsCsv(req) ? await r.plantAccess.requirePlant(principal, plantId) : null] as const);
        setNextPage(req, res, out.nextCursor);
        res.setHeader('X-Resolution', out.resolution);
        if (!plant) return out;
        // CSV is for people: in the plant's unit system, the unit in the header (JSON stays SI).
        const csv = sampleCsv(out.points, out.unit, plant.unitSystem);
        sendCsv(res, `tag-${tagId}-samples.csv`, csv.columns, csv.cells);
      },
    }),
    defineRoute({
      ...common,
      method: 'get',
      path: '/plants/:plantId/balance/live',
      summary: 'The latest balance computation; 200 with balance: null and a reason when none has been computed yet (404 only for an unknown plant)',
      params: plantParams,
      response: balanceLiveResponse,
      handler: async ({ params, principal, res }) => {
        // The plant scope first (403 before anything is read); a balance in memory means the plant exists.
        assertPlantScope(principal, params.plantId);
        const text = live.answer(params.plantId);
        if (text !== undefined) return void res.type('json').send(text);
        const generation = live.generation(params.plantId);
        const out = await plants.balanceLive(principal, params.plantId);
        if (out.balance) live.store(params.plantId, out.balance, generation);
        return out;
      },
    }),
    defineRoute({
      ...common,
      method: 'get',
      path: '/plants/:plantId/balance/history',
      summary: 'Balances over [from, to) (default the last 24 h) bucketed by step (raised so there are ≤ 2000 buckets); each bucket gives its last computation, their count and the worst quality',
      params: plantParams,
      query: balanceHistoryQuery,
      csv: true,
      response: balanceHistoryResponse,
      handler: async ({ params, query: q, principal, req, res }) => {
        const [out, plant] = await readVia(principal, res, true, async (r) => [await r.plants.balanceHistory(principal, params.plantId, q, q.limit ?? DEFAULT_HISTORY_LIMIT), wantsCsv(req) ? await r.plantAccess.requirePlant(principal, params.plantId) : null] as const);
        setNextPage(req, res, out.nextCursor);
        if (!plant) return out;
        const flat = displayColumns(flattenRows(out.rows), plant.unitSystem);
        sendCsv(res, `plant-${out.plantId}-balances.csv`, flat.columns, flat.cells);
      },
    }),
    defineRoute({
      ...common,
      method: 'get',
      path: '/plants/:plantId/alarms',
      summary: 'Alarms, newest raised first; filter by state and by raise time [from, to)',
      params: plantParams,
      query: alarmsQuery,
      csv: true,
      response: alarmsResponse,
      handler: async ({ params, query: q, principal, req, res }) => {
        const out = await readVia(principal, res, wantsCsv(req), (r) => r.plants.alarms(principal, params.plantId, q, q.limit ?? DEFAULT_LIST_LIMIT));
        setNextPage(req, res, out.nextCursor);
        if (!wantsCsv(req)) return out;
        sendCsv(res, `plant-${out.plantId}-alarms.csv`, ALARM_CSV_COLUMNS, out.alarms.map((a) => ALARM_CSV_COLUMNS.map((c) => a[c])));
      },
    }),
  ];
}
