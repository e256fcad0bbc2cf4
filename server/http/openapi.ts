import { z } from 'zod';
import { createDocument, type ZodOpenApiOperationObject, type ZodOpenApiPathsObject } from 'zod-openapi';
import type { RouteDef } from './route.ts';

const errorBody = z.object({
  error: z.object({ code: z.string(), message: z.string(), fields: z.record(z.string(), z.array(z.string())).optional() }),
});

/** The OpenAPI 3.1 document for every declared route, generated from its zod schemas by zod-openapi. */
export function buildOpenApi(defs: RouteDef[], version: string): object {
  const paths: ZodOpenApiPathsObject = {};
  for (const d of defs) {
    const p = '/api/v1' + d.path.replace(/:([A-Za-z_]+)/g, '{$1}');
    const op: ZodOpenApiOperationObject = {
      summary: d.summary,
      tags: [d.tag],
      description: d.role === 'public' ? 'No credentials needed.' : `Minimum role: ${d.role}${d.sessionOnly ? ' (signed-in session only)' : ''}.`,
      security: d.role === 'public' ? [] : [{ bearer: [] }, { session: [] }],
      responses: {
        [String(d.status ?? 200)]: {
          description: 'success',
          content: d.produces
            ? { [d.produces]: { schema: z.string() } }
            : {
                'application/json': { schema: d.response ?? z.unknown() },
                ...(d.csv ? { 'text/csv': { schema: z.string() } } : {}),
              },
        },
        ...(d.role === 'public' ? {} : { 401: { description: 'no or invalid credentials', content: { 'application/json': { schema: errorBody } } } }),
        ...(d.role === 'public' ? {} : { 403: { description: 'role too low or plant out of scope', content: { 'application/json': { schema: errorBody } } } }),
        ...(d.body || d.query || d.params ? { 422: { description: 'invalid input, with field errors', content: { 'application/json': { schema: errorBody } } } } : {}),
      },
    };
    if (d.body) op.requestBody = { content: { 'application/json': { schema: d.body } } };
    if (d.query || d.params) {
      op.requestParams = {};
      if (d.query) op.requestParams.query = d.query as never;
      if (d.params) op.requestParams.path = d.params as never;
    }
    (paths[p] ??= {})[d.method] = op;
  }
  return createDocument({
    openapi: '3.1.0',
    info: {
      title: 'Flocstream API',
      version,
      description: 'Activated-sludge solids balance, RAS margin, storm projection and SRT. Advisory and read-only toward the plant.',
    },
    components: {
      securitySchemes: {
        bearer: { type: 'http', scheme: 'bearer', description: 'API token created under Access (fst_…)' },
        session: { type: 'apiKey', in: 'cookie', name: 'flocstream_session' },
      },
    },
    paths,
  });
}
