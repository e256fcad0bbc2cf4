import type { BalanceRepository } from '../repositories/balance.repository.ts';
import type { BalanceEngineInputs } from '../../shared/domain/balance/inputs.ts';
import { plantBlanketReadings, plantOperatingFit } from '../../shared/domain/balance/operating-settling.ts';
import type { BlanketReading, OperatingSettlingFit } from '../../shared/domain/settling-fit.ts';

const H = 3_600_000;
const D = 86_400_000;
/** A fit tag further behind the plant clock than this is not waited for [ms]. */
const LAG_MAX_MS = 2 * H;

/** The signals the operating fit reads (shared/domain/balance/operating-settling.ts). */
const FIT_SIGNALS = new Set(['clarifier.blanketLevel', 'clarifier.underflowTss', 'pump.flow']);

export interface OperatingSettlingServiceDeps {
  balanceRepo: Pick<BalanceRepository, 'series'>;
  /** How much history one call reads back while the window is not yet covered [h] (default 48). */
  chunk_h?: number;
}

interface PlantCache {
  /** Clarifier geometry and the fit's tags with their units: a change starts the cache afresh. */
  key: string;
  /** The hour-aligned span read so far [from, to) [epoch ms]. */
  from_ms: number;
  to_ms: number;
  byClarifier: Map<number, BlanketReading[]>;
  left: string[];
  fit: OperatingSettlingFit | null;
  /** The window start the cached fit was made for. */
  fitFrom_ms: number;
}

export type OperatingSettlingService = ReturnType<typeof createOperatingSettlingService>;

/**
 * The Vesilind fit to each plant's stable-blanket hours for the balance engine, kept between
 * balances so that a balance every few seconds costs no query and no fit: it reads the minute
 * rollups of the fit's tags only for hours it has not read yet — each new complete hour before
 * the plant clock once every fit tag has passed it, and the history of the window (setting
 * settling.operating_window_d) back one chunk per call until it is covered — turns them into
 * stable-blanket periods and fits again only when those changed (plantBlanketReadings,
 * plantOperatingFit in shared/domain). A changed layout or tag mapping, a plant clock that went
 * back, or a jump forward by more than a chunk (a catch-up after a pause) starts afresh. One
 * cache per engine process; an hour read before all its data had arrived is not read again
 * until it starts afresh (each tag's data reach the rollups in time order).
 */
export function createOperatingSettlingService({ balanceRepo, chunk_h = 48 }: OperatingSettlingServiceDeps) {
  const cache = new Map<number, PlantCache>();
  const chunk_ms = chunk_h * H;
  return {
    async fit(inp: Pick<BalanceEngineInputs, 'layout' | 'readings'>, clock_ms: number, window_d: number): Promise<OperatingSettlingFit> {
      const plantId = inp.layout.plantId;
      const tags = inp.readings.filter((r) => FIT_SIGNALS.has(r.signal));
      // An hour is read once every fit tag has a sample after it: sources arrive at their own
      // pace (an OPC UA poll behind an MQTT stream), and an hour read before its last minutes
      // arrived would be left out for good. A tag more than LAG_MAX behind the plant clock is
      // taken as dead, not waited for (its hours have gaps anyway).
      const recent = tags.flatMap((r) => (r.ts_ms !== null && clock_ms - r.ts_ms <= LAG_MAX_MS ? [r.ts_ms] : []));
      const end = Math.floor(Math.min(clock_ms, ...recent) / H) * H;
      const windowFrom = Math.floor((clock_ms - window_d * D) / H) * H;
      const key = JSON.stringify([
        inp.layout.trains.map((t) => [t.id, t.clarifiers.map((c) => [c.id, c.area_m2, c.count, c.sideWaterDepth_m]), t.pumps.map((p) => [p.id, p.kind])]),
        tags.map((r) => [r.tagId, r.signal, r.targetType, r.targetId, r.unit]).sort(),
      ]);
      let c = cache.get(plantId);
      if (!c || c.key !== key || end < c.to_ms || end - c.to_ms > chunk_ms) {
        c = { key, from_ms: end, to_ms: end, byClarifier: new Map(), left: [], fit: null, fitFrom_ms: windowFrom };
        cache.set(plantId, c);
      }
      const read = async (from: number, to: number) => {
        const series = await balanceRepo.series([...new Set(tags.map((r) => r.tagId))], new Date(from), new Date(to - 1));
        const got = plantBlanketReadings({ layout: inp.layout, readings: inp.readings, series }, from, to);
        for (const [id, rs] of got.byClarifier) c.byClarifier.set(id, [...(c.byClarifier.get(id) ?? []), ...rs].sort((a, b) => a.t_ms - b.t_ms));
        c.left = got.left;
      };
      let changed = c.fit === null || c.fitFrom_ms !== windowFrom;
      if (c.to_ms < end) {
        await read(c.to_ms, end);
        c.to_ms = end;
        changed = true;
      }
      if (c.from_ms > windowFrom) {
        const from = Math.max(windowFrom, c.from_ms - chunk_ms);
        await read(from, c.from_ms);
        c.from_ms = from;
        changed = true;
      }
      if (c.from_ms < windowFrom) {
        // A period [t − 1 h, t) leaves once it starts before the window.
        for (const [id, rs] of c.byClarifier) c.byClarifier.set(id, rs.filter((r) => r.t_ms > windowFrom));
        c.from_ms = windowFrom;
      }
      if (changed || !c.fit) {
        c.fit = plantOperatingFit({ byClarifier: c.byClarifier, left: c.left }, { windowFrom_ms: windowFrom, scannedFrom_ms: c.from_ms, scannedTo_ms: c.to_ms, window_d });
        c.fitFrom_ms = windowFrom;
      }
      return c.fit;
    },
  };
}
