import type { Request, RequestHandler, Response, Router } from 'express';
import type { z } from 'zod';
import type { Role } from '../../shared/contracts/roles.ts';
import type { Principal } from '../auth/principal.ts';
import { requireRole, requireSession } from '../auth/middleware.ts';
import { UnauthorizedError, ValidationError } from './errors.ts';
import { zodFields } from './validate.ts';

type Method = 'get' | 'post' | 'put' | 'patch' | 'delete';
/** A part the route does not declare stands as `z.ZodUndefined`, so the handler sees `undefined` there. */
type Schema = z.ZodType;

/** The caller as a handler sees it: the principal plus the client address (for the audit log). */
export type RoutePrincipal = Principal & { ip: string | null };

/** What a handler receives: the parsed parts, the caller (absent only on public routes), and the raw exchange for the HTTP-only parts (cookies, CSV, SSE). */
export interface RouteInput<B extends Schema, Q extends Schema, P extends Schema, R extends Role | 'public'> {
  body: z.output<B>;
  query: z.output<Q>;
  params: z.output<P>;
  principal: R extends 'public' ? RoutePrincipal | null : RoutePrincipal;
  req: Request;
  res: Response;
}

/** The declaration fields every route has, whatever its schemas. */
interface RouteMeta {
  method: Method;
  path: string;
  /** Session only: API tokens are refused (token and user management). */
  sessionOnly?: boolean;
  summary: string;
  tag: string;
  /** Status of a successful answer (default 200). */
  status?: number;
  /** Also answers text/csv (`?format=csv` or `Accept: text/csv`). */
  csv?: boolean;
  /** Content type when it is not JSON (e.g. text/event-stream). */
  produces?: string;
  /** Extra middleware after auth and before validation (e.g. a body parser for CSV uploads). */
  before?: RequestHandler[];
}

/** A route as written, generic over its schemas so the handler's input is typed. */
export interface RouteSpec<B extends Schema, Q extends Schema, P extends Schema, R extends Role | 'public', O extends Schema> extends RouteMeta {
  /** Minimum role; 'public' routes need no credentials (sign-in, sign-out and the OpenAPI document). */
  role: R;
  body?: B;
  query?: Q;
  params?: P;
  response?: O;
  /** Returns the JSON answer (what the response schema accepts), or undefined when it wrote the response itself. */
  handler: (input: RouteInput<B, Q, P, R>) => z.input<O> | undefined | Promise<z.input<O> | undefined>;
}

/**
 * One declaration per API route, as kept in the route list: its schemas (for the OpenAPI
 * document), its role (for `mount` and the role-matrix test) and `run`, which parses the input
 * with those schemas and calls the typed handler. Lists of routes with different schemas are
 * plain `RouteDef[]`.
 *
 * Route modules export `function xRoutes(ctx: AppContext): RouteDef[]` built with `defineRoute`;
 * paths are relative to /api/v1 in Express syntax (`/plants/:plantId`).
 */
export interface RouteDef extends RouteMeta {
  role: Role | 'public';
  body?: z.ZodType;
  query?: z.ZodType;
  params?: z.ZodType;
  response?: z.ZodType;
  /** Parses params, query and body (422 with every field named on failure), then runs the handler. */
  run(req: Request, res: Response): Promise<unknown>;
}

/** Parses one part; a failure adds its field errors and gives undefined. */
function parsePart<S extends z.ZodType>(schema: S, value: unknown, fields: Record<string, string[]>): z.output<S> | undefined {
  const r = schema.safeParse(value);
  if (r.success) return r.data;
  Object.assign(fields, zodFields(r.error));
  return undefined;
}

/**
 * Declares a route: the handler's `body`, `query` and `params` are `z.output` of the schemas
 * given, and `principal` is set on every route that is not public.
 */
export function defineRoute<B extends Schema = z.ZodUndefined, Q extends Schema = z.ZodUndefined, P extends Schema = z.ZodUndefined, R extends Role | 'public' = Role | 'public', O extends Schema = z.ZodUnknown>(spec: RouteSpec<B, Q, P, R, O>): RouteDef {
  const { handler, ...meta } = spec;
  return {
    ...meta,
    async run(req, res) {
      const fields: Record<string, string[]> = {};
      const params = spec.params && parsePart(spec.params, req.params, fields);
      const query = spec.query && parsePart(spec.query, req.query, fields);
      const body = spec.body && parsePart(spec.body, req.body ?? {}, fields);
      if (Object.keys(fields).length) throw new ValidationError(fields);
      const p = req.principal;
      if (!p && spec.role !== 'public') throw new UnauthorizedError();
      const principal = p ? { ...p, ip: req.ip ?? null } : null;
      // The parts above are exactly the declared schemas' outputs (undefined where none is
      // declared), and principal is non-null unless the route is public: the two facts the
      // conditional types of RouteInput state, which TypeScript cannot follow through `&&`.
      return handler({ params, query, body, principal, req, res } as RouteInput<B, Q, P, R>);
    },
  };
}

export function mount(router: Router, defs: RouteDef[]): void {
  for (const d of defs) {
    const chain: RequestHandler[] = [];
    if (d.role !== 'public') chain.push(requireRole(d.role));
    if (d.sessionOnly) chain.push(requireSession);
    if (d.before) chain.push(...d.before);
    chain.push(async (req, res) => {
      const out = await d.run(req, res);
      if (res.headersSent || out === undefined) return;
      res.status(d.status ?? 200).json(out);
    });
    router[d.method](d.path, ...chain);
  }
}
