/**
 * CSV as RFC 4180 defines it: records separated by CRLF, fields separated by commas, a field
 * that contains a comma, a double quote, CR or LF is enclosed in double quotes and its quotes
 * are doubled (RFC 4180 §2 rules 4–7); the first record is the header (§2 rule 3). Pure.
 *
 * Numbers are written with JavaScript's shortest round-trip form (ECMA-262 Number::toString),
 * so a parsed cell gives back the exact same double; timestamps are ISO 8601 UTC; absent values
 * are empty cells.
 *
 * Text cells are neutralised against formula injection (OWASP, "CSV Injection"): a text cell that
 * starts with `=`, `+`, `-`, `@`, a tab or a carriage return is written with a leading single
 * quote, so a spreadsheet shows it as text instead of evaluating it. Numbers are never text cells
 * here: a negative value stays a number (`-0.5`), only text such as a tag description is prefixed.
 */

import { parse as parseStream, type Options } from 'csv-parse';
import { parse as parseSync } from 'csv-parse/sync';
import type { SamplePoint } from '../../shared/contracts/plant-api.ts';
import type { UnitSystem } from '../../shared/contracts/plant-model.ts';
import { displayUnit, quantityOfField, quantityOfSiUnit } from '../../shared/domain/unit-systems.ts';

export type CsvCell = string | number | boolean | null | undefined | Date;

const FORMULA_START = /^[=+\-@\t\r]/;

/** A text cell as written: prefixed with a single quote when a spreadsheet would read it as a formula (OWASP CSV Injection). */
export function neutraliseText(s: string): string {
  return FORMULA_START.test(s) ? `'${s}` : s;
}

function cellText(v: CsvCell): string {
  if (v === null || v === undefined) return '';
  if (v instanceof Date) return v.toISOString();
  if (typeof v === 'number') return Number.isFinite(v) ? String(v) : '';
  if (typeof v === 'boolean') return String(v);
  return neutraliseText(v);
}

function quote(s: string): string {
  return /[",\r\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

/** One CSV document: header row, then one record per row, CRLF after every record. */
export function toCsv(columns: readonly string[], rows: readonly (readonly CsvCell[])[]): string {
  let out = columns.map((c) => quote(neutraliseText(c))).join(',') + '\r\n';
  for (const r of rows) out += r.map((c) => quote(cellText(c))).join(',') + '\r\n';
  return out;
}

/**
 * Flattens nested objects into dotted columns (`data.inventory_kg`); arrays and values below
 * `depth` are written as JSON text. Columns are the union over all rows, in first-seen order.
 */
export function flattenRows(rows: readonly Record<string, unknown>[], depth = 3): { columns: string[]; cells: CsvCell[][] } {
  const flat = rows.map((r) => {
    const o: Record<string, CsvCell> = {};
    const walk = (v: unknown, prefix: string, d: number) => {
      if (v !== null && typeof v === 'object' && !Array.isArray(v) && !(v instanceof Date) && d < depth) {
        for (const [k, x] of Object.entries(v)) walk(x, prefix ? `${prefix}.${k}` : k, d + 1);
      } else if (Array.isArray(v) || (v !== null && typeof v === 'object' && !(v instanceof Date))) {
        o[prefix] = JSON.stringify(v);
      } else {
        o[prefix] = v as CsvCell;
      }
    };
    walk(r, '', 0);
    return o;
  });
  const columns: string[] = [];
  const seen = new Set<string>();
  for (const o of flat) {
    for (const k of Object.keys(o)) {
      if (seen.has(k)) continue;
      seen.add(k);
      columns.push(k);
    }
  }
  return { columns, cells: flat.map((o) => columns.map((c) => o[c])) };
}

export interface CsvRecord {
  /** Line of the file the record starts on (1-based; the header is line 1). */
  line: number;
  fields: string[];
}

export type CsvParseResult = { ok: true; records: CsvRecord[] } | { ok: false; line: number; message: string };

/** csv-parse's error codes in the words (and RFC 4180 rules) the upload answers give. */
const PARSE_MESSAGES: Record<string, string> = {
  CSV_QUOTE_NOT_CLOSED: 'a quoted field is not closed',
  CSV_INVALID_CLOSING_QUOTE: 'text after a closing quote (RFC 4180 §2 rule 5)',
  INVALID_OPENING_QUOTE: 'a quote inside an unquoted field (RFC 4180 §2 rule 5)',
};

const LF = 0x0a;
const CR = 0x0d;

/** 1-based line of byte `offset`, after skipping the blank lines that start there (csv-parse skips them too). */
function lineAt(buf: Buffer, offset: number): number {
  let i = offset;
  while (i < buf.length && (buf[i] === CR || buf[i] === LF)) i++;
  let line = 1;
  for (let j = 0; j < i; j++) if (buf[j] === LF) line++;
  return line;
}

/** Bytes handed to the parser per turn of the event loop: a 1 MiB upload never holds the loop for long. */
const PARSE_CHUNK_BYTES = 8 * 1024;

/** One parse: csv-parse's options (the same for the sync and the stream API) and what they collect. */
function parseRun(buf: Buffer) {
  const records: CsvRecord[] = [];
  let recordEnd = 0;
  const options: Options = {
    bom: true,
    skip_empty_lines: true,
    relax_column_count: true,
    record_delimiter: ['\r\n', '\n'],
    on_record: (record: string[], ctx) => {
      // ctx.lines is the line the record ends on; line breaks inside quoted fields move its start up.
      let inside = 0;
      for (const f of record) for (let i = f.indexOf('\n'); i !== -1; i = f.indexOf('\n', i + 1)) inside++;
      records.push({ line: ctx.lines - inside, fields: record });
      recordEnd = ctx.bytes;
      return null;
    },
  };
  const failure = (err: unknown): CsvParseResult => {
    const e = err as { code?: string; lines?: number };
    const message = (e.code && PARSE_MESSAGES[e.code]) ?? `not valid CSV (${e.code ?? 'parse error'})`;
    const line = e.code === 'CSV_QUOTE_NOT_CLOSED' || typeof e.lines !== 'number' ? lineAt(buf, recordEnd) : e.lines;
    return { ok: false, line, message };
  };
  return { options, records, failure };
}

/**
 * Parses an RFC 4180 document with csv-parse (the kept parser). Accepts CRLF or LF record ends,
 * also mixed in one file (RFC 4180 asks for CRLF; files from spreadsheets and editors differ),
 * and a UTF-8 byte-order mark; blank lines are skipped; records may differ in length (the
 * callers name the line). A stray quote inside an unquoted field, text after a closing quote or
 * an unclosed quoted field is an error with the line the record starts on (the problem's own
 * line for a stray quote): returned, not thrown, so the caller can report it with the rest.
 * Synchronous: for small documents; uploads go through {@link parseCsvUpload}.
 */
export function parseCsv(text: string): CsvParseResult {
  const buf = Buffer.from(text, 'utf8');
  const run = parseRun(buf);
  try {
    parseSync(buf, run.options);
  } catch (err) {
    return run.failure(err);
  }
  return { ok: true, records: run.records };
}

/** Widest header an upload may have: far above any file's columns (about a dozen), far below what stalls a request. */
export const MAX_UPLOAD_COLUMNS = 1000;

/** Commas + 1 on the first line, counting no further than `limit` (quoted commas count too: an upper bound, enough for a cap). */
function headerWidthAtLeast(text: string, limit: number): number {
  const eol = text.indexOf('\n');
  const end = eol === -1 ? text.length : eol;
  let n = 1;
  for (let i = text.indexOf(','); i !== -1 && i < end && n < limit; i = text.indexOf(',', i + 1)) n++;
  return n;
}

/**
 * {@link parseCsv} for uploads (up to 1 MiB), through csv-parse's stream API: the text is fed in
 * chunks of 8 KiB with a turn of the event loop between them, so the work is linear in the size
 * and never holds other requests for more than a chunk (a 40 000-column header held the loop for
 * hundreds of milliseconds when parsed in one call on a busy machine). A header row wider than
 * `maxColumns` is refused before parsing (line 1).
 */
export async function parseCsvUpload(text: string, maxColumns = MAX_UPLOAD_COLUMNS): Promise<CsvParseResult> {
  const width = headerWidthAtLeast(text, maxColumns + 1);
  if (width > maxColumns) return { ok: false, line: 1, message: `the header row has more than ${maxColumns} columns; no upload has that many` };
  const buf = Buffer.from(text, 'utf8');
  const run = parseRun(buf);
  let failed: CsvParseResult | null = null;
  const parser = parseStream(run.options);
  const done = new Promise<void>((resolve) => {
    parser.on('error', (err) => {
      failed = run.failure(err);
      resolve();
    });
    parser.on('end', () => resolve());
    // on_record keeps every record and filters it out of the stream; reading lets 'end' fire.
    parser.on('data', () => {});
  });
  for (let i = 0; i < buf.length && !failed; i += PARSE_CHUNK_BYTES) {
    parser.write(buf.subarray(i, i + PARSE_CHUNK_BYTES));
    await new Promise<void>((r) => setImmediate(r));
  }
  if (!failed) parser.end();
  await done;
  return failed ?? { ok: true, records: run.records };
}

/** How many names a header message lists before "and N more" (a 40 000-column header must not make a 40 000-name answer). */
const LISTED = 20;
const list = (xs: string[]): string => (xs.length > LISTED ? `${xs.slice(0, LISTED).join(', ')} and ${xs.length - LISTED} more` : xs.join(', '));

/**
 * Checks a header row against the columns a file may have and must have, in one pass with Set
 * lookups (linear in the number of columns: the earlier indexOf scan for duplicates was
 * quadratic, 40 000 columns blocked the API for 3.6 s). Returns the problems as one message, or
 * null when the header is usable. Each unknown or duplicated name is named once.
 */
export function csvHeaderProblem(cols: readonly string[], allowed: readonly string[], required: readonly string[]): { unknown: string[]; duplicate: string[]; missing: string[]; message: string | null } {
  const allowedSet = new Set(allowed);
  const seen = new Set<string>();
  const unknown = new Set<string>();
  const duplicate = new Set<string>();
  for (const c of cols) {
    if (!allowedSet.has(c)) unknown.add(c);
    if (seen.has(c)) duplicate.add(c);
    else seen.add(c);
  }
  const missing = required.filter((c) => !seen.has(c));
  const u = [...unknown];
  const d = [...duplicate];
  const parts = [u.length ? `unknown column(s) ${list(u)}` : '', d.length ? `duplicate column(s) ${list(d)}` : '', missing.length ? `missing column(s) ${list(missing)}` : ''].filter(Boolean);
  return { unknown: u, duplicate: d, missing, message: parts.length ? parts.join('; ') : null };
}

/** A header cell with its unit: `value [gpm]`; a unit-less column keeps its name. */
export function withUnit(name: string, unit: string | null): string {
  return unit ? `${name} [${unit}]` : name;
}

/**
 * Tag history as CSV cells in the plant's display units: value, min and max converted from the
 * tag's SI unit when the plant shows US customary units (shared/domain/unit-systems.ts), the
 * unit written in their headers. A unit with no counterpart (state, %, mL/g) is left as stored.
 */
export function sampleCsv(points: readonly SamplePoint[], tagUnit: string, system: UnitSystem): { columns: string[]; cells: CsvCell[][] } {
  const q = quantityOfSiUnit(tagUnit);
  const du = q ? displayUnit(system, q) : null;
  const conv = (v: number | null | undefined) => (v === null || v === undefined || !du ? v : du.fromSi(v));
  const unit = du?.unit ?? tagUnit;
  return {
    columns: ['ts', withUnit('value', unit), withUnit('min', unit), withUnit('max', unit), 'count', 'quality', 'flags'],
    cells: points.map((p) => [p.ts, conv(p.value), conv(p.min), conv(p.max), p.count, p.quality, p.flags?.join(';')]),
  };
}

/**
 * Flattened balance columns in the plant's display units: a column whose name (or, for a
 * figure's `.value`, whose parent) carries an SI suffix (`mass_kg`, `influent_m3h`) is
 * converted and its header names the display unit; other columns are unchanged.
 */
export function displayColumns(flat: { columns: string[]; cells: CsvCell[][] }, system: UnitSystem): { columns: string[]; cells: CsvCell[][] } {
  const conv = flat.columns.map((c) => {
    const parts = c.split('.');
    const field = parts[parts.length - 1] === 'value' && parts.length > 1 ? parts[parts.length - 2]! : parts[parts.length - 1]!;
    const q = quantityOfField(field);
    return q ? displayUnit(system, q) : null;
  });
  return {
    columns: flat.columns.map((c, i) => withUnit(c, conv[i]?.unit ?? null)),
    cells: flat.cells.map((row) => row.map((v, i) => (typeof v === 'number' && conv[i] ? conv[i]!.fromSi(v) : v))),
  };
}
