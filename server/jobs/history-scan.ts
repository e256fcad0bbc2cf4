/**
 * A byte-level look at a long-layout historian file on its way into PostgreSQL's COPY (the SQL
 * path of server/jobs/history-jobs.ts): which tag names the file uses and which UTC dates its
 * timestamps start with, read from each line's first field and the first ten bytes of its second
 * without parsing the line. The tags decide the name → tag map before the move, the dates the
 * day partitions of `samples` to create first. Pure (no I/O); it never decides what is stored:
 * PostgreSQL parses the CSV, and a line this scan cannot read plainly (a quoted first or second
 * field, an empty line, a second field that does not start with YYYY-MM-DD) marks the file
 * `irregular`, which sends it down the csv-parse path.
 */

const NL = 0x0a;
const CR = 0x0d;
const QUOTE = 0x22;
const DASH = 0x2d;

function isDigit(b: number): boolean {
  return b >= 0x30 && b <= 0x39;
}

export class LineScanner {
  /** Tag field text → the dates (YYYY-MM-DD) its lines start with. */
  readonly tags = new Map<string, Set<string>>();
  /** Why the file is not plain, or null. */
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

  constructor(private readonly delimiter: number) {}

  /** Feeds the next bytes of the file. */
  push(chunk: Buffer): void {
    if (this.irregular) return;
    const b = this.carry ? Buffer.concat([this.carry, chunk]) : chunk;
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
      this.line(b, 0, b.length > 0 && b[b.length - 1] === CR ? b.length - 1 : b.length);
    }
  }

  private line(b: Buffer, start: number, end: number): void {
    if (this.header) {
      this.header = false;
      return;
    }
    this.lines++;
    if (end === start) return void (this.irregular = `line ${this.lines + 1} is empty`);
    if (b[start] === QUOTE) return void (this.irregular = `line ${this.lines + 1} quotes its tag`);
    const d = b.indexOf(this.delimiter, start);
    if (d < 0 || d >= end) return void (this.irregular = `line ${this.lines + 1} has one field`);
    const t = d + 1;
    // YYYY-MM-DD at the start of the second field.
    if (t + 10 > end || b[t + 4] !== DASH || b[t + 7] !== DASH || !isDigit(b[t]!) || !isDigit(b[t + 3]!) || !isDigit(b[t + 6]!) || !isDigit(b[t + 9]!)) {
      return void (this.irregular = `line ${this.lines + 1} does not start its timestamp with YYYY-MM-DD`);
    }
    if (!this.offsets) {
      const e = b.indexOf(this.delimiter, t);
      const tsEnd = e < 0 || e > end ? end : e;
      const sign = b[tsEnd - 6];
      if (tsEnd - t > 19 && (sign === 0x2b || sign === DASH)) this.offsets = true;
    }
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
