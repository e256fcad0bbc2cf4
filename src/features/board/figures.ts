import type { FigureOut } from '../../../shared/contracts/balance.ts';

const RANK = { good: 0, estimated: 1, unavailable: 2 } as const;

/** Worst quality of several figures (a sum is only as good as its weakest part). */
export function worst(...fs: FigureOut['quality'][]): FigureOut['quality'] {
  return fs.reduce((a, b) => (RANK[b] > RANK[a] ? b : a), 'good' as FigureOut['quality']);
}

/** Sum of figures in one unit; unavailable parts make the sum unavailable, never a silent zero. */
export function sumFigures(fs: FigureOut[], unit: string): FigureOut {
  const q = worst(...fs.map((f) => f.quality));
  const reasons = [...new Set(fs.flatMap((f) => f.reasons))];
  if (fs.length === 0) return { value: null, quality: 'unavailable', reasons: ['nothing to add up'], unit };
  if (q === 'unavailable' || fs.some((f) => f.value === null)) return { value: null, quality: 'unavailable', reasons, unit };
  return { value: fs.reduce((s, f) => s + (f.value ?? 0), 0), quality: q, reasons, unit };
}

/** The distinct reasons of the figures that are not good, for the "quality notes" line of a panel. */
export function qualityNotes(fs: FigureOut[]): string[] {
  return [...new Set(fs.filter((f) => f.quality !== 'good').flatMap((f) => f.reasons))];
}
