/**
 * A byte-level look at a long-layout historian file on its way into PostgreSQL's COPY (the SQL
 * path of server/jobs/history-jobs.ts), on this thread while PostgreSQL parses on its own:
 * - which tag names the file uses and which dates its timestamps name (the name → tag map and
 *   the day partitions of `samples` to create before the insert);
 * - whether every line is in the strict form the SQL path reads. PostgreSQL's input functions
 *   are more lenient than the line checks (history-rows.ts): timestamptz input reads
 *   `2026-03-14T~5:09:26Z` or `2026-03--4T15:09:26Z` as times, float8 input reads `0x10`,
 *   `Infinity` and `NaN`. So a line goes to PostgreSQL's casts only in these forms, checked here
 *   byte by byte (a regular expression or a character-set test per field in SQL cost more than
 *   the insert itself: 0.7–1.8 s per million lines against 3–5 s for COPY into `samples`,
 *   measured on this machine): no quote anywhere (PostgreSQL's CSV fields are then exactly the
 *   bytes between delimiters) and as many fields as the header; timestamp YYYY-MM-DDTHH:MM:SS
 *   with no or three decimals and `Z` or ±HH:MM (ECMAScript's Date Time String Format, which
 *   Date.parse reads as timestamptz input does), or without an offset (also with a space for
 *   the T) when the import's zone is UTC; years 19xx and 20xx (Date.UTC maps years 0–99 to
 *   1900–1999); no second 60 (timestamptz input rolls 23:59:60 over, Date.parse refuses it);
 *   value digits, point, sign and exponent letters only, or empty. Field ranges (month 13,
 *   31 February, hour 25) are left to PostgreSQL, which refuses them.
 * Pure (no I/O). The first line outside these forms marks the file `irregular`, which sends it
 * down the csv-parse path: this scan never widens what is accepted, it only picks the path.
 * tests/integration/history-sql-path.test.ts checks every one-character change of the forms
 * against the line checks.
 */

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

export class LineScanner {
  /** Tag field text → the dates (YYYY-MM-DD) its lines name. */
  readonly tags = new Map<string, Set<string>>();
  /** Why the file is not in the strict forms, or null. */
  irregular: string | null = null;
  /** Some timestamp ends in a ±HH:MM offset, so its UTC date may differ from the one it names. */
  offsets = false;
  /** Data lines seen (the header excluded). */
  lines = 0;
  private carry: Buffer | null = null;
  private header = true;
  private lastTag: Buffer = Buffer.alloc(0);
  private lastDate: Buffer = Buffer.alloc(0);
  private lastDates: Set<string> | null = null;
  /** Position of the first quote in the buffer being scanned, or -1. */
  private quote = -1;

  /**
   * @param delimiter the field delimiter's byte
   * @param fields 3 or 4 (the header has the quality column)
   * @param localOk timestamps without an offset are allowed (the import's zone is UTC)
   */
  constructor(
    private readonly delimiter: number,
    private readonly fields: 3 | 4,
    private readonly localOk: boolean,
  ) {}

  /** Feeds the next bytes of the file. */
  push(chunk: Buffer): void {
    if (this.irregular) return;
    const b = this.carry ? Buffer.concat([this.carry, chunk]) : chunk;
    // One search per buffer: the first quote ends the SQL path wherever it is (a search per line
    // would run on to the buffer's end each time: quadratic in the lines of a buffer).
    this.quote = b.indexOf(QUOTE);
    let start = 0;
    for (;;) {
      const nl = b.indexOf(NL, start);
      if (nl < 0) break;
      this.line(b, start, nl > start && b[nl - 1] === CR ? nl - 1 : nl);
      if (this.irregular) return;
      start = nl + 1;
    }
    this.carry = start < b.length ? Buffer.from(b.subarray(start)) : null;
  }

  /** The last line, when the file does not end with a newline. */
  end(): void {
    if (this.carry && !this.irregular) {
      const b = this.carry;
      this.carry = null;
      this.quote = b.indexOf(QUOTE);
      this.line(b, 0, b.length > 0 && b[b.length - 1] === CR ? b.length - 1 : b.length);
    }
  }

  /** Why the line b[start, end) is not in the strict form, or null (no text built for a good line). */
  private lineProblem(b: Buffer, start: number, end: number): string | null {
    if (end === start) return 'empty';
    // The buffer's next quote at or after this line (a quoted header is allowed, CSV lines after it not).
    if (this.quote >= 0 && this.quote < start) this.quote = b.indexOf(QUOTE, start);
    if (this.quote >= start && this.quote < end) return 'a quote';
    const d = b.indexOf(this.delimiter, start);
    if (d < 0 || d >= end) return 'one field';
    const d2 = b.indexOf(this.delimiter, d + 1);
    if (d2 < 0 || d2 >= end) return 'two fields';
    let d3 = b.indexOf(this.delimiter, d2 + 1);
    if (d3 >= end) d3 = -1;
    if ((this.fields === 3) !== (d3 < 0)) return `not ${this.fields} fields`;
    if (d3 >= 0) {
      const d4 = b.indexOf(this.delimiter, d3 + 1);
      if (d4 >= 0 && d4 < end) return 'more than 4 fields';
    }
    const form = strictTimestamp(b, d + 1, d2, this.localOk);
    if (form === null) return 'a timestamp in a form the SQL path does not read';
    if (form === 'offset') this.offsets = true;
    if (!strictValue(b, d2 + 1, d3 < 0 ? end : d3)) return 'a value in a form the SQL path does not read';
    return null;
  }

  private line(b: Buffer, start: number, end: number): void {
    if (this.header) {
      this.header = false;
      return;
    }
    this.lines++;
    const why = this.lineProblem(b, start, end);
    if (why !== null) return void (this.irregular = `line ${this.lines + 1}: ${why}`);
    const d = b.indexOf(this.delimiter, start);
    const t = d + 1;
    // Historian exports run tag by tag in time order: the tag and the date change rarely, so
    // the comparison with the previous line is the common case and allocates nothing.
    if (this.lastDates === null || b.compare(this.lastTag, 0, this.lastTag.length, start, d) !== 0) {
      this.lastTag = Buffer.from(b.subarray(start, d));
      const name = this.lastTag.toString('utf8');
      let dates = this.tags.get(name);
      if (!dates) this.tags.set(name, (dates = new Set()));
      this.lastDates = dates;
      this.lastDate = Buffer.alloc(0);
    }
    if (b.compare(this.lastDate, 0, this.lastDate.length, t, t + 10) !== 0) {
      this.lastDate = Buffer.from(b.subarray(t, t + 10));
      this.lastDates.add(this.lastDate.toString('latin1'));
    }
  }
}
