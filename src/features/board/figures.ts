import type { FigureOut } from '../../../shared/contracts/balance.ts';
import { MAX_PENS } from '../trends/pens.ts';

/** The distinct reasons of the figures that are not good, for the "quality notes" line of a panel. */
export function qualityNotes(fs: FigureOut[]): string[] {
  return [...new Set(fs.filter((f) => f.quality !== 'good').flatMap((f) => f.reasons))];
}

/** The order a train's signals are trended in: the blanket and the solids first, then the flows. */
const TREND_ORDER = ['clarifier.blanketLevel', 'basin.mlss', 'clarifier.underflowTss', 'basin.influentFlow', 'pump.flow', 'clarifier.effluentTss', 'pump.running'];

/**
 * The tags mapped to one train's basins, clarifiers and pumps, in TREND_ORDER (RAS pumps before
 * WAS pumps), at most the pens one trend holds: what "Trend inputs" on a train opens.
 */
export function trainTrendTags(
  train: { basins: { code: string }[]; clarifiers: { code: string }[]; pumps: { code: string; kind: 'ras' | 'was' }[] },
  signals: readonly { tagId: number; signal: string; target: string }[],
): number[] {
  const rank = new Map<string, number>([...train.basins, ...train.clarifiers].map((u) => [u.code, 0]));
  for (const p of train.pumps) rank.set(p.code, p.kind === 'ras' ? 0 : 1);
  const order = (s: { signal: string; target: string }) => {
    const i = TREND_ORDER.indexOf(s.signal);
    return (i < 0 ? TREND_ORDER.length : i) * 2 + (rank.get(s.target) ?? 0);
  };
  const own = signals.filter((s) => rank.has(s.target));
  return [...new Set([...own].sort((a, b) => order(a) - order(b) || a.target.localeCompare(b.target)).map((s) => s.tagId))].slice(0, MAX_PENS);
}
