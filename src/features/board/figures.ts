import type { FigureOut } from '../../../shared/contracts/balance.ts';

/** The distinct reasons of the figures that are not good, for the "quality notes" line of a panel. */
export function qualityNotes(fs: FigureOut[]): string[] {
  return [...new Set(fs.filter((f) => f.quality !== 'good').flatMap((f) => f.reasons))];
}
