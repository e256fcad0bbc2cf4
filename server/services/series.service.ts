import { MAX_POINTS, type Agg, type Resolution, type SamplePoint, type SamplesQuery, type SamplesResponse } from '../../shared/contracts/plant-api.ts';
import { qualityFlags, qualityGrade } from '../../shared/contracts/sample-quality.ts';
import type { Clock } from '../app-context.ts';
import type { Principal } from '../auth/principal.ts';
import { BadRequestError, NotFoundError } from '../http/errors.ts';
import { isNum, isStr, type CursorCodec } from '../http/csv.ts';
import type { PlantRepository } from '../repositories/plant.repository.ts';
import type { RawRow, SeriesRepository } from '../repositories/series.repository.ts';
import type { PlantAccess } from './plant.service.ts';

const HOUR_MS = 3_600_000;
const STEP_ALLOWED: Record<Resolution, number> = { raw: 1, '1m': 60, '1h': 3600 };
/** Rows per page when the caller gives no limit: a whole window fits (≤ ~2000 points, plus slack for raw tags faster than expected). */
export const DEFAULT_SAMPLES_LIMIT = 5000;

export interface ResolutionChoice {
  resolution: Resolution;
  /** Bucket width [s]; null = raw samples, one point each. */
  step_s: number | null;
}

/**
 * Fewest points a window answered from a coarser table still gets: a quarter of MAX_POINTS,
 * about one point per three pixels of a full-HD trend, each bucket carrying its min and max so
 * the envelope (a spike, a dip) stays visible.
 */
export const MIN_POINTS = MAX_POINTS / 4;

const DAY_S = 86_400;
/** Bucket widths [s] that divide a day, for steps the service picks itself (whole days beyond). */
const DAY_DIVIDING_STEPS_S = [1, 2, 3, 4, 5, 6, 10, 12, 15, 20, 30, 60, 120, 180, 240, 300, 360, 600, 720, 900, 1200, 1800, 3600, 7200, 10_800, 14_400, 21_600, 28_800, 43_200, DAY_S];

/**
 * Which table answers a history query, and with which bucket width, so that at most ~2000
 * points come back (DESIGN §5). Pure.
 *
 * - No step asked and the raw samples fit (expected by the tag's period *and* counted, up to
 *   2000): raw samples, one point each.
 * - No step asked otherwise: the coarsest stored resolution whose own step still gives at least
 *   MIN_POINTS points over the span, at that step (rollup_1h for spans of 500 h to 2000 h,
 *   rollup_1m for 500 min to 2000 min): one stored row per point instead of aggregating up to
 *   60 rows per point on every request. Measured on the bench:api data (backend CPU time): a
 *   30-day window as 22-minute buckets of rollup_1m (43 200 rows) cost PostgreSQL ~20 ms per
 *   request, the same window from rollup_1h (720 rows) ~2 ms.
 * - Else the bucket is the larger of the asked step and span/2000: an asked step rounded up to
 *   what the resolution allows, a step of the service's own choosing rounded up to a width that
 *   divides the day (DAY_DIVIDING_STEPS_S); below 60 s raw samples bucketed by the second, below
 *   1 h rollup_1m (multiples of 60 s), else rollup_1h (multiples of 3600 s). Measured with
 *   `npm run bench:api`: the one-year window as 6-hour buckets (1460 points) instead of 5-hour
 *   ones (1752) also cut that answer's CPU, the heaviest of the read mix, by about a sixth.
 *
 * `rawCount` is the counted number of raw samples, capped at MAX_POINTS + 1.
 */
export function chooseResolution(span_ms: number, expectedPeriod_s: number, requestedStep_s: number | undefined, rawCount: number): ResolutionChoice {
  const span_s = span_ms / 1000;
  const expected = span_s / Math.max(expectedPeriod_s, 1e-3);
  if (requestedStep_s === undefined && expected <= MAX_POINTS && rawCount <= MAX_POINTS) return { resolution: 'raw', step_s: null };
  const step = Math.max(requestedStep_s ?? 1, Math.ceil(span_s / MAX_POINTS), 1);
  if (requestedStep_s === undefined) {
    const stored = (['1h', '1m'] as const).find((r) => step <= STEP_ALLOWED[r] && span_s / STEP_ALLOWED[r] >= MIN_POINTS);
    if (stored) return { resolution: stored, step_s: STEP_ALLOWED[stored] };
  }
  // A step of our own choosing is the first of DAY_DIVIDING_STEPS_S that is wide enough, so its
  // buckets tile the UTC day (a year as 6-hour buckets at 00, 06, 12 and 18 h, not 5-hour ones
  // that drift across the days); an asked step is only rounded up to what its table allows.
  const auto = requestedStep_s === undefined ? (DAY_DIVIDING_STEPS_S.find((s) => s >= step) ?? Math.ceil(step / DAY_S) * DAY_S) : undefined;
  const wanted = auto ?? step;
  const resolution: Resolution = wanted < 60 ? 'raw' : wanted < 3600 ? '1m' : '1h';
  const unit = STEP_ALLOWED[resolution];
  return { resolution, step_s: auto ?? Math.ceil(step / unit) * unit };
}

/** Position of each aggregate in a BucketRow. */
const AGG_AT: Record<Agg, 2 | 3 | 4 | 6> = { mean: 2, min: 3, max: 4, last: 6 };

type QualityFields = Pick<SamplePoint, 'quality' | 'flags'>;
/** A window holds few distinct quality codes: each is decoded once per answer. */
function qualityDecoder(): (code: number) => QualityFields {
  const seen = new Map<number, QualityFields>();
  return (code) => {
    let q = seen.get(code);
    if (!q) {
      const flags = qualityFlags(code);
      q = flags.length ? { quality: qualityGrade(code), flags } : { quality: qualityGrade(code) };
      seen.set(code, q);
    }
    return q;
  };
}

interface SamplesCursor extends Record<string, unknown> {
  tag: number;
  f: number;
  t: number;
  r: Resolution;
  s: number | null;
  rs: number | null;
  a: Agg;
  p: number;
}
const isSamplesCursor = (o: Record<string, unknown>): o is SamplesCursor =>
  isNum(o.tag) && isNum(o.f) && isNum(o.t) && isStr(o.r) && ['raw', '1m', '1h'].includes(o.r) && (o.s === null || isNum(o.s)) && (o.rs === null || isNum(o.rs)) && isStr(o.a) && isNum(o.p);

export interface SeriesServiceDeps {
  seriesRepo: Pick<SeriesRepository, 'raw' | 'buckets' | 'rawCountUpTo'>;
  plantRepo: Pick<PlantRepository, 'tag'>;
  plantAccess: PlantAccess;
  clock: Clock;
  /** The deployment's paging cursors (server/http/csv.ts). */
  cursors: CursorCodec;
}

/**
 * Tag history: picks the resolution, reads one page, and writes the cursor of the next page.
 * A cursor carries the window, resolution and step of the first page, so every page of one
 * query is cut the same way; query parameters given beside a cursor must agree with it.
 */
export function createSeriesService({ seriesRepo: series, plantRepo: plants, plantAccess, clock, cursors }: SeriesServiceDeps) {
  return {
    async samples(principal: Principal, plantId: number, tagId: number, q: SamplesQuery): Promise<SamplesResponse> {
      await plantAccess.requirePlant(principal, plantId);
      const tag = await plants.tag(plantId, tagId);
      if (!tag) throw new NotFoundError(`plant ${plantId} has no tag ${tagId}`);
      const limit = q.limit ?? DEFAULT_SAMPLES_LIMIT;
      const agg: Agg = q.agg ?? 'mean';

      let from: number, to: number, choice: ResolutionChoice, requestedStep: number | null, after: number | null;
      if (q.cursor) {
        const c = cursors.decode('samples', q.cursor, isSamplesCursor);
        if (c.tag !== tagId) throw new BadRequestError('the cursor belongs to another tag');
        if ((q.from && Date.parse(q.from) !== c.f) || (q.to && Date.parse(q.to) !== c.t) || (q.step !== undefined && q.step !== c.rs) || (q.agg && q.agg !== c.a)) {
          throw new BadRequestError('from, to, step and agg must be those of the query the cursor came from (or be left out)');
        }
        ({ f: from, t: to, rs: requestedStep, p: after } = c);
        choice = { resolution: c.r, step_s: c.s };
        return readPage(tagId, tag.unit, from, to, choice, requestedStep, c.a, limit, after);
      }
      to = q.to ? Date.parse(q.to) : clock();
      from = q.from ? Date.parse(q.from) : to - HOUR_MS;
      requestedStep = q.step ?? null;
      const rawCount = q.step === undefined && (to - from) / 1000 / Math.max(tag.expectedPeriod_s, 1e-3) <= MAX_POINTS ? await series.rawCountUpTo(tagId, new Date(from), new Date(to), MAX_POINTS + 1) : MAX_POINTS + 1;
      choice = chooseResolution(to - from, tag.expectedPeriod_s, q.step, rawCount);
      return readPage(tagId, tag.unit, from, to, choice, requestedStep, agg, limit, null);
    },
  };

  /** One page of a query whose window and resolution are settled; `after` = position after the previous page (ms). */
  async function readPage(tagId: number, unit: string, from: number, to: number, choice: ResolutionChoice, requestedStep: number | null, agg: Agg, limit: number, after: number | null): Promise<SamplesResponse> {
    const base = { tagId, unit, resolution: choice.resolution, step_s: choice.step_s, agg };
    const cursorOf = (p: number) => cursors.encode('samples', { tag: tagId, f: from, t: to, r: choice.resolution, s: choice.step_s, rs: requestedStep, a: agg, p });
    if (choice.step_s === null) {
      // Raw samples: [from, to), a next page strictly after the last timestamp sent.
      const rows: RawRow[] = await series.raw(tagId, new Date(after ?? from), new Date(to), limit + 1, after !== null);
      const more = rows.length > limit;
      const page = more ? rows.slice(0, limit) : rows;
      const qualityOf = qualityDecoder();
      const points = page.map(([ts, , value, quality]) => ({ ts, value, ...qualityOf(quality) }));
      return { ...base, from: new Date(from).toISOString(), to: new Date(to).toISOString(), points, nextCursor: more ? cursorOf(Math.floor(page[page.length - 1]![1])) : null };
    }
    // Buckets: the window widened to whole buckets, so the first and last bucket are complete.
    const stepMs = choice.step_s * 1000;
    const lo = Math.floor(from / stepMs) * stepMs;
    const hi = Math.ceil(to / stepMs) * stepMs;
    const rows = await series.buckets(choice.resolution, tagId, new Date(after ?? lo), new Date(hi), choice.step_s, limit + 1, agg === 'last');
    const more = rows.length > limit;
    const page = more ? rows.slice(0, limit) : rows;
    const at = AGG_AT[agg];
    const qualityOf = qualityDecoder();
    const points = page.map((b) => ({ ts: b[0], value: b[at], min: b[3], max: b[4], count: b[5], ...qualityOf(b[7]) }));
    return { ...base, from: new Date(lo).toISOString(), to: new Date(hi).toISOString(), points, nextCursor: more ? cursorOf(page[page.length - 1]![1] + stepMs) : null };
  }
}

