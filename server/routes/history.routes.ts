import { historyImportAccepted, historyImportQuery, historyJobOut, jobParams } from '../../shared/contracts/history.ts';
import { plantParams } from '../../shared/contracts/plant-api.ts';
import { services, type AppContext } from '../app-context.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';

/**
 * Historian import: the CSV file is the request body (streamed to disk by the service, so the
 * API's JSON body parser never sees it), options in the query; 202 with the job id, then the
 * job's state at /jobs/:jobId. Integrator and up, plant-scoped, audited.
 */
export function historyRoutes(ctx: AppContext): RouteDef[] {
  const { historyImport } = services(ctx);
  return [
    defineRoute({
      method: 'post',
      path: '/plants/:plantId/history',
      role: 'integrator',
      tag: 'history',
      summary:
        'Import a historian CSV (body: the file, text/csv or application/octet-stream): long layout tag,ts,value[,quality] or wide ts,<tag>,…; a header may give a unit as "FIT-101 [gpm]" (converted to the tag unit); all or nothing; dryRun=1 only checks. Answers 202 {jobId}',
      status: 202,
      params: plantParams,
      query: historyImportQuery,
      response: historyImportAccepted,
      handler: ({ params, query, principal, req }) => {
        const name = req.get('x-file-name');
        return historyImport.start(principal, params.plantId, query, req, { contentType: req.get('content-type') ?? null, fileName: name ? decodeURIComponent(name).slice(0, 200) : null });
      },
    }),
    defineRoute({
      method: 'get',
      path: '/jobs/:jobId',
      role: 'integrator',
      tag: 'history',
      summary: 'State of a history job (import or balance recompute): state, progress 0–1, rows, rejected, the first 1000 errors with line numbers, startedAt, finishedAt',
      params: jobParams,
      response: historyJobOut,
      handler: ({ params, principal }) => historyImport.job(principal, params.jobId),
    }),
  ];
}
