import express from 'express';
import { labImportResponse, labResultInput, labResultOut, labResultsQuery, labResultsResponse } from '../../shared/contracts/lab.ts';
import { plantParams } from '../../shared/contracts/plant-api.ts';
import { services, type AppContext } from '../app-context.ts';
import { sendCsv, setNextPage, wantsCsv } from '../http/csv.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';
import { LAB_CSV_EXPORT_COLUMNS, labCsvRows } from '../services/lab.service.ts';
import { READ_SOURCE_HEADER } from '../services/read-routing.service.ts';

/** Largest CSV upload [bytes]; 1 MiB holds far more than the row limit of a day's lab sheet. */
export const LAB_CSV_MAX_BYTES = 1 << 20;
const DEFAULT_LIMIT = 500;

/** The CSV body parser, on the import route only (the API's global parser takes JSON). */
const csvBody = express.text({ type: ['text/csv', 'text/plain', 'application/csv'], limit: LAB_CSV_MAX_BYTES });

/**
 * Lab results of a plant: any role reads, operator and up writes (form or CSV); every write is
 * audited. Import policy: all or nothing (see the import summary).
 */
export function labRoutes(ctx: AppContext): RouteDef[] {
  const { lab, reads } = services(ctx);
  return [
    defineRoute({
      method: 'get',
      path: '/plants/:plantId/lab-results',
      role: 'analyst',
      tag: 'lab',
      summary: 'Lab results, newest sample first; filter by kind, location and sample time [from, to)',
      params: plantParams,
      query: labResultsQuery,
      csv: true,
      response: labResultsResponse,
      handler: async ({ params, query, principal, req, res }) => {
        // The replica when DATABASE_READ_URL is set, unless this caller's own entry may not be there
        // yet or the replica cannot be reached.
        const { out, source } = await reads.run(principal, (r) => r.lab.list(principal, params.plantId, query, query.limit ?? DEFAULT_LIMIT));
        res.setHeader(READ_SOURCE_HEADER, source);
        setNextPage(req, res, out.nextCursor);
        if (!wantsCsv(req)) return out;
        sendCsv(res, `plant-${out.plantId}-lab-results.csv`, LAB_CSV_EXPORT_COLUMNS, labCsvRows(out.results));
      },
    }),
    defineRoute({
      method: 'post',
      path: '/plants/:plantId/lab-results',
      role: 'operator',
      tag: 'lab',
      summary:
        'Enter one lab result: SVI, DSVI or SSVI from the test readings (index computed by the server, mL/g; a settled volume above 250 mL/L undiluted is refused: dilute and repeat), MLSS [g/L] or TSS [mg/L]; sampledAt not in the future; location a basin or clarifier code of the plant',
      status: 201,
      params: plantParams,
      body: labResultInput,
      response: labResultOut,
      handler: ({ params, body, principal }) => lab.create(principal, params.plantId, body),
    }),
    defineRoute({
      method: 'post',
      path: '/plants/:plantId/lab-results/import',
      role: 'operator',
      tag: 'lab',
      summary:
        'Upload lab results as CSV (Content-Type: text/csv, RFC 4180, header row with the form field names: kind, sampledAt, location, settledVolume_mLL, mlss_gL, dilutionFactor, tss_mgL, note; at most 1 MiB and 5000 rows). All or nothing: if any row is invalid, nothing is stored and the 422 lists every bad row as line.<n>.<field> (the header is line 1)',
      status: 201,
      params: plantParams,
      before: [csvBody],
      response: labImportResponse,
      handler: ({ params, principal, req }) => lab.importCsv(principal, params.plantId, typeof req.body === 'string' ? req.body : undefined),
    }),
  ];
}
