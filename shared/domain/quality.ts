/**
 * Quality of computed figures. Every number the domain layer returns travels with a grade
 * and the reasons for it, in the spirit of OPC UA status codes (OPC 10000-4 §7.39: Good /
 * Uncertain / Bad) as adopted for samples in shared/contracts/sample-quality.ts:
 * `good` ↔ Good, `estimated` ↔ Uncertain, `unavailable` ↔ Bad. A figure that cannot be
 * computed is `unavailable` with a null value — never NaN, Infinity or a silent zero.
 */
import type { FigureOut } from '../contracts/balance.js';
import type { QualityGrade } from '../contracts/sample-quality.js';

export type Quality = 'good' | 'estimated' | 'unavailable';

/** Grade plus the human-readable reasons for any downgrade. */
export interface QualityInfo {
  quality: Quality;
  reasons: readonly string[];
}

/** A value with its quality. `value` is null exactly when `quality` is 'unavailable'. */
export interface Figure<T = number> {
  value: T | null;
  quality: Quality;
  reasons: string[];
}

const RANK: Record<Quality, number> = { good: 0, estimated: 1, unavailable: 2 };

/** Worst of several grades (unavailable > estimated > good); no argument means good. */
export function worstQuality(...qs: Quality[]): Quality {
  let w: Quality = 'good';
  for (const q of qs) if (RANK[q] > RANK[w]) w = q;
  return w;
}

/** Combines input qualities: the worst grade wins and the reasons are concatenated (duplicates dropped, order kept). */
export function combineQuality(...items: readonly QualityInfo[]): { quality: Quality; reasons: string[] } {
  const reasons: string[] = [];
  for (const it of items) for (const r of it.reasons) if (!reasons.includes(r)) reasons.push(r);
  return { quality: worstQuality(...items.map((i) => i.quality)), reasons };
}

/** A good figure; a non-finite number becomes unavailable (guard against NaN/Infinity leaking out). */
export function good<T>(value: T, reasons: string[] = []): Figure<T> {
  if (typeof value === 'number' && !Number.isFinite(value)) return unavailable('result is not a finite number');
  return { value, quality: 'good', reasons };
}

/** An estimated figure with its reasons; a non-finite number becomes unavailable. */
export function estimated<T>(value: T, ...reasons: string[]): Figure<T> {
  if (typeof value === 'number' && !Number.isFinite(value)) return unavailable('result is not a finite number', ...reasons);
  return { value, quality: 'estimated', reasons };
}

/** An unavailable figure: null value and the reasons why. */
export function unavailable<T = never>(...reasons: string[]): Figure<T> {
  return { value: null, quality: 'unavailable', reasons: reasons.length ? reasons : ['not computed'] };
}

/**
 * Downgrades a figure by the qualities of the inputs it was computed from (worst wins, reasons
 * concatenated). An unavailable input makes the figure unavailable with a null value.
 */
export function propagate<T>(fig: Figure<T>, ...inputs: readonly QualityInfo[]): Figure<T> {
  const c = combineQuality(...inputs, fig);
  if (c.quality === 'unavailable') return { value: null, quality: 'unavailable', reasons: c.reasons.length ? c.reasons : ['not computed'] };
  return { value: fig.value, quality: c.quality, reasons: c.reasons };
}

/**
 * Applies `fn` to the values of input figures. If any input is unavailable the result is
 * unavailable (fn is not called); otherwise fn's figure is downgraded by the inputs' qualities.
 */
export function lift<K extends string, T>(inputs: Record<K, Figure<number>>, fn: (v: Record<K, number>) => Figure<T>): Figure<T> {
  const list = Object.values(inputs) as Figure<number>[];
  if (list.some((f) => f.value === null || f.quality === 'unavailable')) {
    const c = combineQuality(...list);
    return unavailable(...c.reasons);
  }
  const values = {} as Record<K, number>;
  for (const k of Object.keys(inputs) as K[]) values[k] = inputs[k].value as number;
  return propagate(fn(values), ...list);
}

/** Maps a stored sample grade (shared/contracts/sample-quality.ts) to a figure quality. */
export function qualityFromSampleGrade(grade: QualityGrade): Quality {
  return grade === 'good' ? 'good' : grade === 'uncertain' ? 'estimated' : 'unavailable';
}

/** A figure built from a finite number, or unavailable with `reason` if it is not finite. */
export function finiteFigure(value: number, reason: string): Figure<number> {
  return Number.isFinite(value) ? { value, quality: 'good', reasons: [] } : unavailable(reason);
}

/**
 * Applies `fn` to the values of input figures given as a list (the positional sibling of
 * {@link lift}). If any input is unavailable the result is unavailable with the inputs' reasons
 * and fn is not called; otherwise fn's result (a number is taken as good) is downgraded by the
 * inputs' qualities.
 */
export function fromFigures(inputs: readonly Figure<number>[], fn: (...values: number[]) => number | Figure<number>): Figure<number> {
  if (inputs.some((i) => i.value === null)) return unavailable(...combineQuality(...inputs).reasons);
  const r = fn(...inputs.map((i) => i.value as number));
  return propagate(typeof r === 'number' ? good(r) : r, ...inputs);
}

/**
 * Sum of figures (e.g. the masses of several basins): worst quality, reasons united. Unavailable
 * if any part is — a partial sum would be a silent under-count — and when there is no part
 * (`what` names the missing parts in the reason).
 */
export function sumFigures(parts: readonly Figure<number>[], what: string): Figure<number> {
  if (parts.length === 0) return unavailable(`no ${what} configured`);
  return fromFigures(parts, (...v) => v.reduce((a, b) => a + b, 0));
}

/** Arithmetic mean of figures, quality as {@link sumFigures}. */
export function meanFigures(parts: readonly Figure<number>[], what: string): Figure<number> {
  if (parts.length === 0) return unavailable(`no ${what} configured`);
  return fromFigures(parts, (...v) => v.reduce((a, b) => a + b, 0) / v.length);
}

/** A figure with its unit, as the contracts carry it (shared/contracts/balance.ts FigureOut). */
export function withUnit(f: Figure<number>, unit: string): FigureOut {
  return { value: f.value, quality: f.quality, reasons: [...f.reasons], unit };
}
