/**
 * CSV as RFC 4180 defines it: records separated by CRLF, fields separated by commas, a field
 * that contains a comma, a double quote, CR or LF is enclosed in double quotes and its quotes
 * are doubled (RFC 4180 §2 rules 4–7); the first record is the header (§2 rule 3). Pure.
 *
 * Numbers are written with JavaScript's shortest round-trip form (ECMA-262 Number::toString),
 * so a parsed cell gives back the exact same double; timestamps are ISO 8601 UTC; absent values
 * are empty cells.
 */

import type { SamplePoint } from '../../shared/contracts/plant-api.ts';
import type { UnitSystem } from '../../shared/contracts/plant-model.ts';
import { displayUnit, quantityOfField, quantityOfSiUnit } from '../../shared/domain/unit-systems.ts';

export type CsvCell = string | number | boolean | null | undefined | Date;

function cellText(v: CsvCell): string {
  if (v === null || v === undefined) return '';
  if (v instanceof Date) return v.toISOString();
  if (typeof v === 'number') return Number.isFinite(v) ? String(v) : '';
  return String(v);
}

function quote(s: string): string {
  return /[",\r\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

/** One CSV document: header row, then one record per row, CRLF after every record. */
export function toCsv(columns: readonly string[], rows: readonly (readonly CsvCell[])[]): string {
  let out = columns.map(quote).join(',') + '\r\n';
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

/**
 * Parses an RFC 4180 document. Accepts CRLF or LF line ends (RFC 4180 asks for CRLF; files from
 * spreadsheets and editors differ) and a UTF-8 byte-order mark; blank lines are skipped. A
 * stray quote inside an unquoted field or an unclosed quoted field is an error with its line:
 * returned, not thrown, so the caller can report it with the rest.
 */
export function parseCsv(text: string): CsvParseResult {
  const s = text.charCodeAt(0) === 0xfeff ? text.slice(1) : text;
  const records: CsvRecord[] = [];
  let line = 1;
  let i = 0;
  const n = s.length;
  while (i < n) {
    const start = line;
    const fields: string[] = [];
    let field = '';
    let quoted = false;
    let endOfRecord = false;
    // One record.
    while (i < n && !endOfRecord) {
      const ch = s[i]!;
      if (quoted) {
        if (ch === '"') {
          if (s[i + 1] === '"') {
            field += '"';
            i += 2;
          } else {
            quoted = false;
            i++;
            const next = s[i];
            if (next !== undefined && next !== ',' && next !== '\r' && next !== '\n') return { ok: false, line, message: 'text after a closing quote (RFC 4180 §2 rule 5)' };
          }
        } else {
          if (ch === '\n') line++;
          field += ch;
          i++;
        }
      } else if (ch === '"') {
        if (field !== '') return { ok: false, line, message: 'a quote inside an unquoted field (RFC 4180 §2 rule 5)' };
        quoted = true;
        i++;
      } else if (ch === ',') {
        fields.push(field);
        field = '';
        i++;
      } else if (ch === '\r' || ch === '\n') {
        i += ch === '\r' && s[i + 1] === '\n' ? 2 : 1;
        line++;
        endOfRecord = true;
      } else {
        field += ch;
        i++;
      }
    }
    if (quoted) return { ok: false, line: start, message: 'a quoted field is not closed' };
    fields.push(field);
    if (fields.length === 1 && fields[0] === '') continue;
    records.push({ line: start, fields });
  }
  return { ok: true, records };
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
