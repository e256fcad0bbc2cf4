/**
 * A byte-level pass over a long-layout historian file on its way into PostgreSQL's COPY (the SQL
 * path of server/jobs/history-jobs.ts), on this thread while PostgreSQL parses on its own. It
 * checks that every line is in the strict form the SQL path reads and rewrites it as a COPY
 * text row `tag_id TAB ts TAB value TAB quality` of the typed staging table, so PostgreSQL's
 * COPY lands typed columns and the move into `samples` is a plain INSERT … SELECT with no cast,
 * join or CASE per row (measured in tests/bench/backfill.bench.ts: the text staging's INSERT with
 * its casts took 1.7 times psql's COPY of the same rows).
 * - The tag field is resolved once per change of tag (the line checks' column(): name, `[unit]`,
 *   factor, declared range); an unknown tag or unit leaves the file to the csv-parse path.
 * - Timestamp and value keep their text, for PostgreSQL's input functions, which are more lenient
 *   than the line checks (history-rows.ts): timestamptz input reads `2026-03-14T~5:09:26Z` or
 *   `2026-03--4T15:09:26Z` as times, float8 input reads `0x10`, `Infinity` and `NaN`. So a line
 *   passes only in these forms, checked here byte by byte: no quote anywhere (the fields are then
 *   exactly the bytes between delimiters) and as many fields as the header; timestamp
 *   YYYY-MM-DDTHH:MM:SS with no or three decimals and `Z` or ±HH:MM (ECMAScript's Date Time
 *   String Format, which Date.parse reads as timestamptz input does), or without an offset (also
 *   with a space for the T) when the import's zone is UTC; years 19xx and 20xx (Date.UTC maps
 *   years 0–99 to 1900–1999); no second 60 (timestamptz input rolls 23:59:60 over, Date.parse
 *   refuses it). Field ranges (month 13, 31 February, hour 25) are left to PostgreSQL, which
 *   refuses them.
 * - The value is read with Number() (the line checks' reading; both it and float8 input round
 *   correctly, so they give the same double for the same text): only digits, point, sign and
 *   exponent letters, a finite number, or empty with quality bad (written `\N`). Its text goes to
 *   COPY as it is when the tag needs no unit conversion; otherwise the converted number is
 *   written in JavaScript's shortest round-trip form, which float8 input reads back to the same
 *   double. Out of the tag's declared range it is flagged as the line checks flag it.
 * - Quality: good/uncertain/bad in lower, Title or UPPER case, empty (good), or a code of one to
 *   five digits up to 32767, written as the code the line checks store.
 * Pure (no I/O). The first line outside these forms marks the file `irregular`, which sends it
 * down the csv-parse path: this pass never widens what is accepted, it only picks the path.
 * tests/integration/history-sql-path.test.ts checks every one-character change of the forms
 * against the line checks, through PostgreSQL's input functions.
 */
import { QUALITY_FLAG, QUALITY_GRADE } from '../../shared/contracts/sample-quality.ts';

const NL = 0x0a;
const CR = 0x0d;
const QUOTE = 0x22;
const DASH = 0x2d;
const PLUS = 0x2b;
const COLON = 0x3a;
const DOT = 0x2e;
const T = 0x54;
const Z = 0x5a;
const SPACE = 0x20;
const E_LOWER = 0x65;
const E_UPPER = 0x45;

function isDigit(b: number | undefined): boolean {
  return b !== undefined && b >= 0x30 && b <= 0x39;
}

/** Digits at each of these offsets from `at`. */
function digitsAt(b: Buffer, at: number, offsets: readonly number[]): boolean {
  for (const o of offsets) if (!isDigit(b[at + o])) return false;
  return true;
}

const DATE_TIME_DIGITS = [0, 1, 2, 3, 5, 6, 8, 9, 11, 12, 14, 15, 17, 18];

/** The timestamp field b[s, e) in one of the strict forms: 'offset' (±HH:MM), 'plain' (Z or local), or null. */
function strictTimestamp(b: Buffer, s: number, e: number, localOk: boolean): 'offset' | 'plain' | null {
  if (e - s < 19) return null;
  if (!(b[s] === 0x32 && b[s + 1] === 0x30) && !(b[s] === 0x31 && b[s + 1] === 0x39)) return null;
  if (b[s + 4] !== DASH || b[s + 7] !== DASH || b[s + 13] !== COLON || b[s + 16] !== COLON || !digitsAt(b, s, DATE_TIME_DIGITS)) return null;
  if (b[s + 17]! >= 0x36) return null;
  const sep = b[s + 10];
  let i = s + 19;
  if (i < e && b[i] === DOT) {
    if (!digitsAt(b, i, [1, 2, 3])) return null;
    i += 4;
  }
  if (i === e) return localOk && (sep === T || sep === SPACE) ? 'plain' : null;
  if (sep !== T) return null;
  if (b[i] === Z) return i + 1 === e ? 'plain' : null;
  if ((b[i] === PLUS || b[i] === DASH) && i + 6 === e && b[i + 3] === COLON && digitsAt(b, i, [1, 2, 4, 5])) return 'offset';
  return null;
}

/** The value field b[s, e): digits, point, sign and exponent letters only (or empty). */
function strictValue(b: Buffer, s: number, e: number): boolean {
  for (let i = s; i < e; i++) {
    const c = b[i]!;
    if (!(isDigit(c) || c === DOT || c === DASH || c === PLUS || c === E_LOWER || c === E_UPPER)) return false;
  }
  return true;
}

/** Exact powers of ten (10^22 is the largest a double holds exactly). */
const POW10 = Array.from({ length: 23 }, (_, k) => 10 ** k);

/**
 * The value field b[s, e) (in the strict form) as Number() reads it. A decimal without exponent
 * of at most 15 digits is its integer digits divided by a power of ten: both exact doubles, so
 * the one division rounds correctly, as Number() does (Clinger, "How to read floating point
 * numbers accurately", PLDI 1990, the fast path); anything else goes to Number() itself.
 */
export function readValue(b: Buffer, s: number, e: number): number {
  let i = s;
  const neg = b[i] === DASH;
  if (neg || b[i] === PLUS) i++;
  let m = 0;
  let digits = 0;
  let frac = -1;
  for (; i < e; i++) {
    const c = b[i]!;
    if (c >= 0x30 && c <= 0x39) {
      m = m * 10 + (c - 0x30);
      digits++;
      if (frac >= 0) frac++;
    } else if (c === DOT && frac < 0) frac = 0;
    else break;
  }
  if (i !== e || digits === 0 || digits > 15) return Number(b.toString('latin1', s, e));
  const v = frac > 0 ? m / POW10[frac]! : m;
  return neg ? -v : v;
}

/** Copies b[s, e) to o at `at` (fields of a few bytes: a loop costs less than a native call). */
function put(b: Buffer, s: number, e: number, o: Buffer, at: number): number {
  for (let i = s; i < e; i++) o[at++] = b[i]!;
  return at;
}

/** A tag field of the file as the line checks resolve it: the tag, the factor from the file's unit, the declared range. */
export interface ScanTag {
  tagId: number;
  factor: number;
  rangeLow: number | null;
  rangeHigh: number | null;
}

interface ResolvedTag extends ScanTag {
  /** The tag id and a tab, as COPY text. */
  prefix: Buffer;
}

const TAB = 0x09;
const NULL_VALUE = Buffer.from('\\N');
/** The COPY text of the quality codes below 256 (the grades with their flags). */
const QUALITY_TEXT = Array.from({ length: 256 }, (_, q) => Buffer.from(String(q)));
const UNCERTAIN = QUALITY_GRADE.uncertain | QUALITY_FLAG.sourceStatus;
const BAD = QUALITY_GRADE.bad | QUALITY_FLAG.sourceStatus;

/** The quality field b[s, e) as a code (as parseQuality of history-rows.ts reads it), or null outside the strict forms. */
function strictQuality(b: Buffer, s: number, e: number): number | null {
  const n = e - s;
  if (n === 0) return QUALITY_GRADE.good;
  if (isDigit(b[s])) {
    if (n > 5) return null;
    let q = 0;
    for (let i = s; i < e; i++) {
      if (!isDigit(b[i])) return null;
      q = q * 10 + b[i]! - 0x30;
    }
    return q <= 32767 ? q : null;
  }
  const word = b.toString('latin1', s, e);
  if (word === 'good' || word === 'Good' || word === 'GOOD') return QUALITY_GRADE.good;
  if (word === 'bad' || word === 'Bad' || word === 'BAD') return BAD;
  if (word === 'uncertain' || word === 'Uncertain' || word === 'UNCERTAIN') return UNCERTAIN;
  return null;
}

export class LineScanner {
  /** Why the file is not in the strict forms, or null. */
  irregular: string | null = null;
  /** Data lines seen (the header excluded). */
  lines = 0;
  private carry: Buffer | null = null;
  private header = true;
  private lastTag: Buffer = Buffer.alloc(0);
  private tag: ResolvedTag | null = null;
  private readonly resolved = new Map<string, ResolvedTag | string>();
  /** Position of the first quote in the buffer being scanned, or -1. */
  private quote = -1;
  private out: Buffer = Buffer.alloc(0);
  private at = 0;

  /**
   * @param delimiter the field delimiter's byte
   * @param fields 3 or 4 (the header has the quality column)
   * @param localOk timestamps without an offset are allowed (the import's zone is UTC)
   * @param resolve a tag field's text → its tag, or why it cannot be used (the line checks' column())
   */
  constructor(
    private readonly delimiter: number,
    private readonly fields: 3 | 4,
    private readonly localOk: boolean,
    private readonly resolve: (text: string) => ScanTag | string,
  ) {}

  /** Feeds the next bytes of the file; returns the COPY text rows of the lines it completes (nothing once irregular). */
  push(chunk: Buffer): Buffer {
    if (this.irregular) return NO_ROWS;
    const b = this.carry ? Buffer.concat([this.carry, chunk]) : chunk;
    this.begin(b.length);
    // One search per buffer: the first quote ends the SQL path wherever it is (a search per line
    // would run on to the buffer's end each time: quadratic in the lines of a buffer).
    this.quote = b.indexOf(QUOTE);
    let start = 0;
    for (;;) {
      const nl = b.indexOf(NL, start);
      if (nl < 0) break;
      this.line(b, start, nl > start && b[nl - 1] === CR ? nl - 1 : nl);
      if (this.irregular) return NO_ROWS;
      start = nl + 1;
    }
    this.carry = start < b.length ? Buffer.from(b.subarray(start)) : null;
    return this.out.subarray(0, this.at);
  }

  /** The last line, when the file does not end with a newline; its COPY text row. */
  end(): Buffer {
    if (!this.carry || this.irregular) return NO_ROWS;
    const b = this.carry;
    this.carry = null;
    this.begin(b.length);
    this.quote = b.indexOf(QUOTE);
    this.line(b, 0, b.length > 0 && b[b.length - 1] === CR ? b.length - 1 : b.length);
    return this.irregular ? NO_ROWS : this.out.subarray(0, this.at);
  }

  /** A fresh output buffer for the rows of `bytes` of input (the caller may still hold the last one). */
  private begin(bytes: number): void {
    this.out = Buffer.allocUnsafe(bytes + 1024);
    this.at = 0;
  }

  /** Room for `n` more bytes of output. */
  private room(n: number): void {
    if (this.at + n <= this.out.length) return;
    const bigger = Buffer.allocUnsafe(Math.max(this.out.length * 2, this.at + n));
    this.out.copy(bigger, 0, 0, this.at);
    this.out = bigger;
  }

  /** Why the line b[start, end) is not in the strict form, or null (no text built for a good line). */
  private lineProblem(b: Buffer, start: number, end: number): string | null {
    if (end === start) return 'empty';
    // The buffer's next quote at or after this line (a quoted header is allowed, CSV lines after it not).
    if (this.quote >= 0 && this.quote < start) this.quote = b.indexOf(QUOTE, start);
    if (this.quote >= start && this.quote < end) return 'a quote';
    // The delimiters, in one loop over the line's bytes.
    const delim = this.delimiter;
    let d = -1;
    let d2 = -1;
    let d3 = -1;
    for (let i = start; i < end; i++) {
      if (b[i] !== delim) continue;
      if (d < 0) d = i;
      else if (d2 < 0) d2 = i;
      else if (d3 < 0) d3 = i;
      else return 'more than 4 fields';
    }
    if (d < 0) return 'one field';
    if (d2 < 0) return 'two fields';
    if ((this.fields === 3) !== (d3 < 0)) return `not ${this.fields} fields`;
    if (strictTimestamp(b, d + 1, d2, this.localOk) === null) return 'a timestamp in a form the SQL path does not read';
    if (!strictValue(b, d2 + 1, d3 < 0 ? end : d3)) return 'a value in a form the SQL path does not read';
    return this.row(b, start, d, d2, d3, end);
  }

  /** Writes the COPY text row of a line whose fields are in form; or why it cannot be stored as the line checks would. */
  private row(b: Buffer, start: number, d: number, d2: number, d3: number, end: number): string | null {
    // Historian exports run tag by tag: the tag changes rarely, so the comparison with the
    // previous line is the common case and allocates nothing.
    if (this.tag === null || !this.sameTag(b, start, d)) {
      this.lastTag = Buffer.from(b.subarray(start, d));
      const text = this.lastTag.toString('utf8');
      let r = this.resolved.get(text);
      if (r === undefined) {
        const t = this.resolve(text);
        r = typeof t === 'string' ? t : { ...t, prefix: Buffer.from(`${t.tagId}\t`) };
        this.resolved.set(text, r);
      }
      if (typeof r === 'string') return r;
      this.tag = r;
    }
    const tag = this.tag;
    let q: number | null = QUALITY_GRADE.good;
    if (d3 >= 0) {
      q = strictQuality(b, d3 + 1, end);
      if (q === null) return 'a quality in a form the SQL path does not read';
    }
    const vs = d2 + 1;
    const ve = d3 < 0 ? end : d3;
    let value: Buffer | string | null = null;
    if (ve === vs) {
      if ((q & 3) !== QUALITY_GRADE.bad) return 'an empty value with a quality other than bad';
    } else {
      let v = readValue(b, vs, ve);
      if (Number.isNaN(v)) return 'a value that is not a number';
      if (tag.factor !== 1) {
        v *= tag.factor;
        value = String(v);
      }
      if (!Number.isFinite(v)) return 'a value that is not finite';
      if ((tag.rangeLow !== null && v < tag.rangeLow) || (tag.rangeHigh !== null && v > tag.rangeHigh)) {
        q = (q & ~3) | QUALITY_FLAG.outOfRange | Math.max(q & 3, QUALITY_GRADE.uncertain);
      }
    }
    const qText = QUALITY_TEXT[q] ?? Buffer.from(String(q));
    this.room(tag.prefix.length + (d2 - d) + (value === null ? Math.max(ve - vs, 2) : value.length) + qText.length + 3);
    const o = this.out;
    let at = put(tag.prefix, 0, tag.prefix.length, o, this.at);
    at = put(b, d + 1, d2, o, at);
    o[at++] = TAB;
    if (ve === vs) at = put(NULL_VALUE, 0, NULL_VALUE.length, o, at);
    else if (value === null) at = put(b, vs, ve, o, at);
    else at += o.write(value, at, 'latin1');
    o[at++] = TAB;
    at = put(qText, 0, qText.length, o, at);
    o[at++] = NL;
    this.at = at;
    return null;
  }

  /** The tag field b[start, end) is the previous line's. */
  private sameTag(b: Buffer, start: number, end: number): boolean {
    const t = this.lastTag;
    if (end - start !== t.length) return false;
    for (let i = 0; i < t.length; i++) if (b[start + i] !== t[i]) return false;
    return true;
  }

  private line(b: Buffer, start: number, end: number): void {
    if (this.header) {
      this.header = false;
      return;
    }
    this.lines++;
    const why = this.lineProblem(b, start, end);
    if (why !== null) this.irregular = `line ${this.lines + 1}: ${why}`;
  }
}

const NO_ROWS = Buffer.alloc(0);
