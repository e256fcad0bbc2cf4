/**
 * Settling parameters from the plant's operation, as the balance gathers them: the stable-blanket
 * hours of every clarifier (stableBlanketReadings, settling-fit.ts) from the rollup series of its
 * blanket level, underflow TSS and its train's RAS and WAS flows, and the operating Vesilind fit
 * through them (operatingSettlingFit; limiting flux, Keinath et al. 1977) with what the window
 * covered. Pure: the server reads the series (server/services/operating-settling.service.ts).
 */
import { unavailable } from '../quality.js';
import { DEFAULT_BLANKET_READING_RULES, operatingSettlingFit, stableBlanketReadings, type BlanketReading, type BlanketReadingRules, type OperatingSettlingFit } from '../settling-fit.js';
import type { SignalKindName } from '../../contracts/plant-layout.js';
import type { BalanceEngineInputs, LayoutIn } from './inputs.js';
import { clarifierArea_m2 } from './inventory.js';
import { seriesInBaseUnit, sumSeries, type MinuteSeries } from './series.js';
import { signalUnitFactor } from './signals.js';

export interface PlantBlanketReadings {
  /** Stable-blanket periods per clarifier id, oldest first. */
  byClarifier: Map<number, BlanketReading[]>;
  /** Clarifiers left out, each with the reason. */
  left: string[];
}

/**
 * The clarifiers whose own underflow is known: those alone in their train. A train with several
 * clarifier entries shares its RAS and WAS flows between them by a split nobody measures, and a
 * wrong split moves u = (Q_R + Q_W)/A and with it the whole limiting-flux curve, so those are
 * left out with the reason rather than split by area as the state point does.
 */
export function operatingFitClarifiers(layout: LayoutIn): { ids: number[]; left: string[] } {
  const ids: number[] = [];
  const left: string[] = [];
  for (const t of layout.trains) {
    if (t.clarifiers.length === 1) ids.push(t.clarifiers[0]!.id);
    else for (const c of t.clarifiers) left.push(`${c.code}: left out of the operating fit, train ${t.code} has ${t.clarifiers.length} clarifier entries and the split of its RAS and WAS flows between them is not measured`);
  }
  return { ids, left };
}

/**
 * Stable-blanket periods of the plant's clarifiers within [from_ms, to_ms) (hour-aligned bounds
 * give whole periods): per clarifier alone in its train (operatingFitClarifiers), its blanket
 * level and underflow TSS and the sums of its train's RAS and WAS pump flows, each in base units
 * through the signal table (signals.ts, bad buckets left out), into stableBlanketReadings at the clarifier's area
 * (units × area). A train with no WAS pump wastes elsewhere: Q_W = 0 then. Clarifiers without a
 * blanket level, underflow TSS or RAS flow tag are left out with the reason.
 */
export function plantBlanketReadings(
  inp: Pick<BalanceEngineInputs, 'layout' | 'readings' | 'series'>,
  from_ms: number,
  to_ms: number,
  rules: BlanketReadingRules = DEFAULT_BLANKET_READING_RULES,
): PlantBlanketReadings {
  const find = (signal: SignalKindName, type: 'clarifier' | 'pump', id: number) => inp.readings.find((r) => r.signal === signal && r.targetType === type && r.targetId === id);
  const mapped = (signal: SignalKindName, type: 'clarifier' | 'pump', id: number) => find(signal, type, id) !== undefined;
  // The tag's buckets in [from, to) in base units (bad buckets left out, as everywhere in the balance); a unit of the wrong dimension gives none.
  const series = (signal: SignalKindName, type: 'clarifier' | 'pump', id: number): MinuteSeries => {
    const r = find(signal, type, id)!;
    const factor = signalUnitFactor(signal, r.unit);
    return factor === null ? new Map() : seriesInBaseUnit(inp.series.get(r.tagId) ?? [], factor, from_ms, to_ms - 1);
  };
  const { ids, left } = operatingFitClarifiers(inp.layout);
  const byClarifier = new Map<number, BlanketReading[]>();
  for (const t of inp.layout.trains) {
    const c = t.clarifiers[0];
    if (!c || !ids.includes(c.id)) continue;
    const ras = t.pumps.filter((p) => p.kind === 'ras');
    const was = t.pumps.filter((p) => p.kind === 'was');
    const missing = [
      mapped('clarifier.blanketLevel', 'clarifier', c.id) ? null : 'blanket level',
      mapped('clarifier.underflowTss', 'clarifier', c.id) ? null : 'underflow TSS',
      ras.length && ras.every((p) => mapped('pump.flow', 'pump', p.id)) ? null : 'RAS flow',
      was.every((p) => mapped('pump.flow', 'pump', p.id)) ? null : 'WAS flow',
    ].filter((m) => m !== null);
    if (missing.length) {
      left.push(`${c.code}: left out of the operating fit, no tag for its ${missing.join(', ')}`);
      continue;
    }
    const level_m = series('clarifier.blanketLevel', 'clarifier', c.id);
    const rasFlow_m3h = sumSeries(ras.map((p) => series('pump.flow', 'pump', p.id)));
    const wasFlow_m3h = was.length ? sumSeries(was.map((p) => series('pump.flow', 'pump', p.id))) : new Map([...level_m.keys()].map((k) => [k, 0]));
    const underflowTss_gL = series('clarifier.underflowTss', 'clarifier', c.id);
    byClarifier.set(c.id, stableBlanketReadings({ level_m, underflowTss_gL, rasFlow_m3h, wasFlow_m3h }, { area_m2: clarifierArea_m2(c), sideWaterDepth_m: c.sideWaterDepth_m }, rules));
  }
  return { byClarifier, left };
}

/** What the operating fit covered: the window asked for and the part of it read so far. */
export interface OperatingFitCoverage {
  /** Start of the window (plant clock − settling.operating_window_d) [epoch ms]. */
  windowFrom_ms: number;
  /** The span read so far [epoch ms]; the engine reads history back one chunk per balance. */
  scannedFrom_ms: number;
  scannedTo_ms: number;
  window_d: number;
}

/**
 * The operating Vesilind fit of the plant: operatingSettlingFit through the stable-blanket periods
 * of all its clarifiers pooled, as the lab fit pools its tests and the correlation takes the one
 * SVI of the plant (one sludge assumed), with the clarifiers left out and, while the history is
 * still being read, how far back it reaches, among the reasons.
 */
export function plantOperatingFit(readings: PlantBlanketReadings, coverage: OperatingFitCoverage): OperatingSettlingFit {
  const all = [...readings.byClarifier.values()].flat().sort((a, b) => a.t_ms - b.t_ms);
  const f = operatingSettlingFit(all);
  const notes = [...readings.left];
  if (coverage.scannedFrom_ms > coverage.windowFrom_ms) {
    notes.push(`history read back to ${new Date(coverage.scannedFrom_ms).toISOString()} of the ${coverage.window_d}-day window so far (setting settling.operating_window_d; one chunk per balance)`);
  }
  if (readings.byClarifier.size === 0) return { ...f, fit: unavailable('no clarifier with the tags of the operating fit', ...notes) };
  return { ...f, fit: { ...f.fit, reasons: [...f.fit.reasons, ...notes] } };
}
