import {
  LAB_CSV_COLUMNS,
  LAB_CSV_MAX_ROWS,
  LAB_CSV_NUMERIC,
  LAB_UNITS,
  labResultInput,
  type LabResultInput,
  type LabResultOut,
  type LabResultsQuery,
} from '../../shared/contracts/lab.ts';
import { settleabilityIndex } from '../../shared/domain/settleability.ts';
import type { Principal } from '../auth/principal.ts';
import { isNum, isStr, type CursorCodec } from '../http/csv.ts';
import { BadRequestError, UnsupportedMediaTypeError, ValidationError } from '../http/errors.ts';
import { zodFields } from '../http/validate.ts';
import type { LabRepository, LabRow, NewLabRow } from '../repositories/lab.repository.ts';
import type { Actor, AuditLog } from './audit.service.ts';
import { csvHeaderProblem, parseCsvUpload } from './csv.service.ts';
import type { PlantAccess } from './plant.service.ts';

export function labOut(r: LabRow): LabResultOut {
  return {
    id: r.id,
    plantId: r.plantId,
    kind: r.kind,
    value: r.value,
    unit: r.unit,
    location: r.location,
    sampledAt: r.sampledAt.toISOString(),
    details: r.details as Record<string, unknown>,
    flags: r.flags,
    enteredBy: r.enteredBy,
    createdAt: r.createdAt.toISOString(),
  };
}

/**
 * The stored row for a validated input: settleability indices computed by the shared domain
 * code (SVI = V30/MLSS, DSVI = V30·dilution/MLSS; an off-reference SSVI is flagged), readings
 * kept as entered in `details`, unit fixed by kind. Pure.
 */
export function labRow(plantId: number, userId: number | null, r: LabResultInput): NewLabRow {
  const base = { plantId, kind: r.kind, unit: LAB_UNITS[r.kind], location: r.location ?? null, sampledAt: new Date(r.sampledAt), enteredBy: userId };
  const note = r.note !== undefined ? { note: r.note } : {};
  if (r.kind === 'MLSS') return { ...base, value: r.mlss_gL, details: { ...note }, flags: [] };
  if (r.kind === 'TSS') return { ...base, value: r.tss_mgL, details: { ...note }, flags: [] };
  const fig = settleabilityIndex({ settledVolume_mLL: r.settledVolume_mLL, mlss_gL: r.mlss_gL, dilutionFactor: r.dilutionFactor, kind: r.kind });
  const details = { settledVolume_mLL: r.settledVolume_mLL, mlss_gL: r.mlss_gL, ...(r.dilutionFactor !== undefined ? { dilutionFactor: r.dilutionFactor } : {}), ...note };
  return { ...base, value: fig.value!.svi_mLg, details, flags: fig.quality === 'good' ? [] : fig.reasons.map((x) => `estimated: ${x}`) };
}

/** A CSV cell as the JSON form would carry it: numeric columns as numbers when they read as one (else the text, so zod names the field). */
function cellValue(column: string, text: string): unknown {
  const t = text.trim();
  if (!LAB_CSV_NUMERIC.has(column)) return t;
  // Plain decimal notation only: "1e3", "0x10" or "12,5" are refused rather than guessed.
  return /^[+-]?(\d+\.?\d*|\.\d+)$/.test(t) ? Number(t) : t;
}

const isLabCursor = (o: Record<string, unknown>): o is { p: number; ts: string; id: number } => isNum(o.p) && isStr(o.ts) && isNum(o.id);

/**
 * Lab results. Import policy: a CSV file is all or nothing — when any row is invalid nothing is
 * stored and the 422 names every bad row by its line and field; a valid file is stored in one
 * transaction and audited as one write.
 */
export interface LabServiceDeps {
  labRepo: Pick<LabRepository, 'locationCodes' | 'insertAll' | 'list'>;
  plantAccess: PlantAccess;
  audit: AuditLog;
  /** The deployment's paging cursors (server/http/csv.ts). */
  cursors: CursorCodec;
}

export function createLabService({ labRepo: repo, plantAccess, audit, cursors }: LabServiceDeps) {

  function checkLocations(inputs: Array<{ key: string; input: LabResultInput }>, codes: Set<string>, fields: Record<string, string[]>) {
    for (const { key, input } of inputs) {
      if (input.location !== undefined && !codes.has(input.location)) {
        (fields[key ? `${key}.location` : 'location'] ??= []).push(`no basin or clarifier "${input.location}" in this plant (known: ${[...codes].join(', ') || 'none'})`);
      }
    }
  }

  return {
    async create(principal: Actor, plantId: number, input: LabResultInput): Promise<LabResultOut> {
      await plantAccess.requirePlant(principal, plantId);
      const fields: Record<string, string[]> = {};
      checkLocations([{ key: '', input }], await repo.locationCodes(plantId), fields);
      if (Object.keys(fields).length) throw new ValidationError(fields);
      const [row] = await repo.insertAll([labRow(plantId, principal.userId, input)]);
      await audit.record(principal, 'lab.create', `lab_result:${row!.id}`, { plantId, kind: row!.kind, value: row!.value, unit: row!.unit, sampledAt: row!.sampledAt.toISOString(), location: row!.location });
      return labOut(row!);
    },

    /** `text` undefined: the upload was not a CSV body (415). */
    async importCsv(principal: Actor, plantId: number, text: string | undefined): Promise<{ imported: number; results: LabResultOut[] }> {
      await plantAccess.requirePlant(principal, plantId);
      if (text === undefined) throw new UnsupportedMediaTypeError('send the file as the request body with Content-Type: text/csv');
      const parsed = await parseCsvUpload(text);
      if (!parsed.ok) throw new ValidationError({ [`line.${parsed.line}`]: [parsed.message] }, 'the file is not valid CSV (RFC 4180); nothing was stored');
      const [header, ...records] = parsed.records;
      if (!header) throw new ValidationError({ _: ['the file is empty; expected a header row and at least one result'] });
      const cols = header.fields.map((c) => c.trim());
      const headerCheck = csvHeaderProblem(cols, LAB_CSV_COLUMNS, ['kind', 'sampledAt']);
      if (headerCheck.message) {
        throw new ValidationError({ 'line.1': [`${headerCheck.message}; the columns are ${LAB_CSV_COLUMNS.join(', ')}`] }, 'the header row is not usable; nothing was stored');
      }
      if (!records.length) throw new ValidationError({ _: ['the file has a header but no results'] });
      if (records.length > LAB_CSV_MAX_ROWS) throw new ValidationError({ _: [`at most ${LAB_CSV_MAX_ROWS} rows per file; this one has ${records.length}`] });

      const fields: Record<string, string[]> = {};
      const good: Array<{ key: string; input: LabResultInput }> = [];
      for (const rec of records) {
        const key = `line.${rec.line}`;
        if (rec.fields.length !== cols.length) {
          fields[key] = [`${rec.fields.length} fields where the header has ${cols.length} (RFC 4180 §2 rule 4)`];
          continue;
        }
        const obj: Record<string, unknown> = {};
        cols.forEach((c, i) => {
          const cell = rec.fields[i]!;
          if (cell.trim() !== '') obj[c] = cellValue(c, cell);
        });
        const r = labResultInput.safeParse(obj);
        if (r.success) good.push({ key, input: r.data });
        else for (const [f, msgs] of Object.entries(zodFields(r.error))) fields[f === '_' ? key : `${key}.${f}`] = msgs;
      }
      checkLocations(good, await repo.locationCodes(plantId), fields);
      const bad = new Set(Object.keys(fields).map((k) => k.split('.').slice(0, 2).join('.'))).size;
      if (bad) throw new ValidationError(fields, `${bad} of ${records.length} rows have errors (line numbers count the header as line 1); nothing was stored — fix them and upload the whole file again`);

      const rows = await repo.insertAll(good.map((g) => labRow(plantId, principal.userId, g.input)));
      await audit.record(principal, 'lab.import', `plant:${plantId}`, { plantId, rows: rows.length, ids: rows.map((r) => r.id), kinds: [...new Set(rows.map((r) => r.kind))] });
      return { imported: rows.length, results: rows.map(labOut) };
    },

    async list(principal: Principal, plantId: number, q: LabResultsQuery, limit: number) {
      await plantAccess.requirePlant(principal, plantId);
      const before = q.cursor ? cursors.decode('lab', q.cursor, isLabCursor) : undefined;
      if (before && before.p !== plantId) throw new BadRequestError('the cursor belongs to another plant');
      const rows = await repo.list(plantId, { kind: q.kind, location: q.location, from: q.from ? new Date(q.from) : undefined, to: q.to ? new Date(q.to) : undefined, before }, limit + 1);
      const more = rows.length > limit;
      const page = more ? rows.slice(0, limit) : rows;
      const last = page[page.length - 1];
      return { plantId, results: page.map(labOut), nextCursor: more && last ? cursors.encode('lab', { p: plantId, ts: last.cursorTs, id: last.id }) : null };
    },
  };
}

export type LabService = ReturnType<typeof createLabService>;

export const LAB_CSV_EXPORT_COLUMNS = ['id', 'kind', 'value', 'unit', 'location', 'sampledAt', 'settledVolume_mLL', 'mlss_gL', 'dilutionFactor', 'note', 'flags', 'enteredBy', 'createdAt'] as const;
export function labCsvRows(rows: LabResultOut[]) {
  return rows.map((r) => {
    const d = r.details as Record<string, number | string | undefined>;
    return [r.id, r.kind, r.value, r.unit, r.location, r.sampledAt, d.settledVolume_mLL, d.mlss_gL, d.dilutionFactor, d.note, r.flags.join(';'), r.enteredBy, r.createdAt];
  });
}
