/**
 * The line checks of a historian import, pure: header → columns (tag, unit conversion), each CSV
 * record → samples or problems. No I/O; server/jobs/history-import.job.ts streams the file
 * through csv-parse and hands every record here.
 */
import { HISTORY_MAX_ERRORS, type HistoryRowError } from '../../shared/contracts/history.ts';
import { QUALITY_FLAG, QUALITY_GRADE } from '../../shared/contracts/sample-quality.ts';
import { conversionFactor } from '../../shared/domain/units.ts';
import type { Sample } from '../../ingest/pipeline/types.ts';

export interface ImportTag {
  id: number;
  name: string;
  unit: string;
  rangeLow: number | null;
  rangeHigh: number | null;
}

/** A tag column as the file names it: the tag and the factor from the file's unit to the tag's unit. */
interface Column {
  tag: ImportTag;
  factor: number;
}

/** `FIT-101 [gpm]` → name and unit; `FIT-101` → unit null. */
export function splitUnit(header: string): { name: string; unit: string | null } {
  const m = /^(.*?)\s*\[([^\]]*)\]\s*$/.exec(header);
  return m ? { name: m[1]!.trim(), unit: m[2]!.trim() } : { name: header.trim(), unit: null };
}

const ISO_OFFSET = /(?:[zZ]|[+-]\d\d(?::?\d\d)?)$/;
const ISO_LOCAL = /^(\d{4})-(\d\d)-(\d\d)(?:[T ](\d\d):(\d\d)(?::(\d\d)(?:[.,](\d{1,9}))?)?)?$/;

/**
 * Offset of `timeZone` from UTC at the instant `utc_ms` [ms], from Intl's wall-clock parts
 * (ECMA-402 DateTimeFormat); cached per hour, since zones change offset on whole quarter hours.
 */
function zoneOffset(timeZone: string): (utc_ms: number) => number {
  if (timeZone === 'UTC' || timeZone === 'Etc/UTC') return () => 0;
  const fmt = new Intl.DateTimeFormat('en-US', { timeZone, hourCycle: 'h23', year: 'numeric', month: 'numeric', day: 'numeric', hour: 'numeric', minute: 'numeric', second: 'numeric' });
  const cache = new Map<number, number>();
  return (utc_ms) => {
    const key = Math.floor(utc_ms / 900_000);
    let off = cache.get(key);
    if (off === undefined) {
      const p: Record<string, number> = {};
      for (const x of fmt.formatToParts(new Date(key * 900_000))) if (x.type !== 'literal') p[x.type] = Number(x.value);
      off = Date.UTC(p.year!, p.month! - 1, p.day!, p.hour!, p.minute!, p.second!) - key * 900_000;
      cache.set(key, off);
    }
    return off;
  };
}

/**
 * Wall-clock fields in `timeZone` → epoch ms: the offset at the naive UTC reading, then checked
 * once more at the result (a time near a change of offset). A time skipped by a spring-forward
 * change reads as the instant after it; a repeated one as its first occurrence.
 */
function localToUtc(offsetAt: (ms: number) => number, naive_ms: number): number {
  const first = naive_ms - offsetAt(naive_ms);
  const second = naive_ms - offsetAt(first);
  return second;
}

/**
 * A timestamp parser for the import's options: `iso` (ISO 8601; a time without an offset is
 * read in `timeZone`), `epoch_s`, `epoch_ms`, or a pattern such as `DD.MM.YYYY HH:mm:ss` read in
 * `timeZone`. Returns epoch ms or null for text that does not match.
 */
export function timestampParser(format: string, timeZone: string): (text: string) => number | null {
  const offsetAt = zoneOffset(timeZone);
  if (format === 'epoch_s' || format === 'epoch_ms') {
    const k = format === 'epoch_s' ? 1000 : 1;
    return (t) => {
      if (!/^\d+(\.\d+)?$/.test(t)) return null;
      return Math.round(Number(t) * k);
    };
  }
  if (format === 'iso') {
    return (t) => {
      if (ISO_OFFSET.test(t)) {
        const ms = Date.parse(t);
        return Number.isFinite(ms) && /^\d{4}-\d\d-\d\d/.test(t) ? ms : null;
      }
      const m = ISO_LOCAL.exec(t);
      if (!m) return null;
      return fieldsToUtc(offsetAt, +m[1]!, +m[2]!, +m[3]!, +(m[4] ?? 0), +(m[5] ?? 0), +(m[6] ?? 0), m[7] ?? '');
    };
  }
  // A pattern: each token becomes a capture group, everything else is literal.
  const order: string[] = [];
  const re = format.replace(/YYYY|MM|DD|HH|mm|ss|SSS|[.*+?^${}()|[\]\\]/g, (tok) => {
    if (tok.length === 1) return `\\${tok}`;
    order.push(tok);
    return tok === 'YYYY' ? '(\\d{4})' : tok === 'SSS' ? '(\\d{1,9})' : '(\\d{1,2})';
  });
  const rx = new RegExp(`^${re}$`);
  return (t) => {
    const m = rx.exec(t);
    if (!m) return null;
    const f: Record<string, string> = {};
    order.forEach((tok, i) => (f[tok] = m[i + 1]!));
    return fieldsToUtc(offsetAt, +(f.YYYY ?? NaN), +(f.MM ?? 1), +(f.DD ?? 1), +(f.HH ?? 0), +(f.mm ?? 0), +(f.ss ?? 0), f.SSS ?? '');
  };
}

function fieldsToUtc(offsetAt: (ms: number) => number, y: number, mo: number, d: number, h: number, mi: number, s: number, frac: string): number | null {
  if (!(mo >= 1 && mo <= 12 && d >= 1 && d <= 31 && h <= 24 && mi <= 59 && s <= 60)) return null;
  const naive = Date.UTC(y, mo - 1, d, h, mi, s) + (frac ? Math.round(Number(`0.${frac}`) * 1000) : 0);
  if (!Number.isFinite(naive)) return null;
  // Date.UTC rolls 31 February over into March: refuse a day the month does not have.
  if (new Date(Date.UTC(y, mo - 1, d)).getUTCDate() !== d) return null;
  return localToUtc(offsetAt, naive);
}

/** Plain decimal or exponent notation only: hex (`0x10`), `Infinity` or `12,5` are refused, not guessed. */
const NUMBER = /^\s*[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?\s*$/;

/** The optional quality column: good/uncertain/bad (any case) or a stored quality code 0–32767. */
export function parseQuality(t: string): number | null {
  const s = t.trim().toLowerCase();
  if (s === '' || s === 'good') return QUALITY_GRADE.good;
  if (s === 'uncertain') return QUALITY_GRADE.uncertain | QUALITY_FLAG.sourceStatus;
  if (s === 'bad') return QUALITY_GRADE.bad | QUALITY_FLAG.sourceStatus;
  if (/^\d{1,5}$/.test(s) && Number(s) <= 32767) return Number(s);
  return null;
}

/** Outside the tag's declared range: kept, graded at least uncertain and flagged (never refused). */
function rangeQuality(tag: ImportTag, v: number, q: number): number {
  if ((tag.rangeLow !== null && v < tag.rangeLow) || (tag.rangeHigh !== null && v > tag.rangeHigh)) {
    return (q & ~0b11) | QUALITY_FLAG.outOfRange | Math.max(q & 0b11, QUALITY_GRADE.uncertain);
  }
  return q;
}

export interface CheckerOptions {
  layout: 'auto' | 'long' | 'wide';
  tsFormat: string;
  timezone: string;
}

/**
 * Checks a file record by record. `header()` takes the first record and decides the layout;
 * `row()` appends the samples of one record to `out` or records its problems. A line with any
 * problem contributes no sample; `rejected` counts those lines, `errors` keeps the first 1000.
 * Per-tag first and last times and the UTC days touched are kept for the move and the rollups.
 */
export class RowChecker {
  layout: 'long' | 'wide' = 'long';
  rejected = 0;
  rows = 0;
  readonly errors: HistoryRowError[] = [];
  readonly days = new Set<number>();
  /** tag id → [first ts, last ts] of the file's accepted samples. */
  readonly window = new Map<number, [number, number]>();
  private readonly byName: Map<string, ImportTag>;
  private readonly parseTs: (t: string) => number | null;
  private wide: (Column | null)[] = [];
  private readonly longColumns = new Map<string, Column | string>();
  private lastTsText = '';
  private lastTs: number | null = null;
  private lastDay = NaN;

  constructor(
    tags: readonly ImportTag[],
    private readonly opts: CheckerOptions,
  ) {
    this.byName = new Map(tags.map((t) => [t.name, t]));
    this.parseTs = timestampParser(opts.tsFormat, opts.timezone);
  }

  private problem(line: number, field: string, message: string): void {
    if (this.errors.length < HISTORY_MAX_ERRORS) this.errors.push({ line, field, message });
  }

  /** The column of a tag header or long-layout tag field (with an optional `[unit]`), or the reason it cannot be used. */
  column(text: string): Column | string {
    const { name, unit } = splitUnit(text);
    const tag = this.byName.get(name);
    if (!tag) return `unknown tag "${name}" (not a tag of this plant)`;
    if (unit === null || unit === tag.unit) return { tag, factor: 1 };
    const factor = conversionFactor(unit, tag.unit);
    if (factor === null) return `unit "${unit}" cannot be converted to the tag's unit "${tag.unit}"`;
    return { tag, factor };
  }

  /** Reads the header (line 1); false when the file cannot be read at all (the reason is in errors). */
  header(record: string[]): boolean {
    const first = (record[0] ?? '').trim().toLowerCase();
    const layout = this.opts.layout === 'auto' ? (first === 'tag' ? 'long' : 'wide') : this.opts.layout;
    this.layout = layout;
    const names = record.map((x) => x.trim().toLowerCase());
    if (layout === 'long') {
      const ok = names[0] === 'tag' && names[1] === 'ts' && names[2] === 'value' && (names.length === 3 || (names.length === 4 && names[3] === 'quality'));
      if (!ok) this.problem(1, 'header', 'long layout needs the header tag,ts,value or tag,ts,value,quality');
      return ok;
    }
    if (names[0] !== 'ts' || record.length < 2) {
      this.problem(1, 'header', 'wide layout needs the header ts,<tag>,<tag>,…');
      return false;
    }
    let ok = true;
    const seen = new Set<number>();
    this.wide = record.slice(1).map((h, i) => {
      const c = this.column(h);
      if (typeof c === 'string') {
        this.problem(1, h, c);
        ok = false;
        return null;
      }
      if (seen.has(c.tag.id)) {
        this.problem(1, h, `tag "${c.tag.name}" has two columns (column ${i + 2})`);
        ok = false;
      }
      seen.add(c.tag.id);
      return c;
    });
    return ok;
  }

  private ts(text: string): number | null {
    if (text === this.lastTsText) return this.lastTs;
    const ms = this.parseTs(text.trim());
    this.lastTsText = text;
    this.lastTs = ms;
    return ms;
  }

  private accept(out: Sample[], tag: ImportTag, ts: number, value: number | null, quality: number): void {
    out.push({ tagId: tag.id, ts, value, quality });
    const w = this.window.get(tag.id);
    if (!w) this.window.set(tag.id, [ts, ts]);
    else if (ts < w[0]) w[0] = ts;
    else if (ts > w[1]) w[1] = ts;
    const day = Math.floor(ts / 86_400_000);
    if (day !== this.lastDay) {
      this.days.add(day);
      this.lastDay = day;
    }
  }

  /** Checks one data record (line number `line`) and appends its samples to `out`. */
  row(record: string[], line: number, out: Sample[]): void {
    this.rows++;
    if (this.layout === 'long') this.longRow(record, line, out);
    else this.wideRow(record, line, out);
  }

  private longRow(r: string[], line: number, out: Sample[]): void {
    if (r.length < 3 || r.length > 4) {
      this.rejected++;
      return this.problem(line, 'line', `expected 3 or 4 fields, found ${r.length}`);
    }
    const name = r[0]!;
    let col = this.longColumns.get(name);
    if (col === undefined) this.longColumns.set(name, (col = this.column(name)));
    let bad = false;
    if (typeof col === 'string') {
      this.problem(line, 'tag', col);
      bad = true;
    }
    const ts = this.ts(r[1]!);
    if (ts === null) {
      this.problem(line, 'ts', `"${r[1]}" is not a timestamp in the format ${this.opts.tsFormat}`);
      bad = true;
    }
    let q: number | null = QUALITY_GRADE.good;
    if (r.length === 4) {
      q = parseQuality(r[3]!);
      if (q === null) {
        this.problem(line, 'quality', `"${r[3]}" is not good, uncertain, bad or a quality code`);
        bad = true;
      }
    }
    const text = r[2]!;
    let value: number | null = null;
    if (text.trim() === '' && q !== null && (q & 0b11) === QUALITY_GRADE.bad) value = null;
    else if (NUMBER.test(text)) value = Number(text);
    else {
      this.problem(line, 'value', `"${text}" is not a number`);
      bad = true;
    }
    if (bad) {
      this.rejected++;
      return;
    }
    const c = col as Column;
    const v = value === null ? null : value * c.factor;
    this.accept(out, c.tag, ts!, v, v === null ? q! : rangeQuality(c.tag, v, q!));
  }

  private wideRow(r: string[], line: number, out: Sample[]): void {
    if (r.length !== this.wide.length + 1) {
      this.rejected++;
      return this.problem(line, 'line', `expected ${this.wide.length + 1} fields, found ${r.length}`);
    }
    const ts = this.ts(r[0]!);
    let bad = ts === null;
    if (bad) this.problem(line, 'ts', `"${r[0]}" is not a timestamp in the format ${this.opts.tsFormat}`);
    const start = out.length;
    for (let i = 1; i < r.length; i++) {
      const text = r[i]!;
      if (text.trim() === '') continue;
      const c = this.wide[i - 1]!;
      if (!NUMBER.test(text)) {
        this.problem(line, c.tag.name, `"${text}" is not a number`);
        bad = true;
        continue;
      }
      if (!bad) {
        const v = Number(text) * c.factor;
        this.accept(out, c.tag, ts!, v, rangeQuality(c.tag, v, QUALITY_GRADE.good));
      }
    }
    if (bad) {
      out.length = start;
      this.rejected++;
    }
  }
}
