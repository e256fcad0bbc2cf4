import type { Request, RequestHandler, Response, Router } from 'express';
import type { z } from 'zod';
import type { Role } from '../../shared/contracts/roles.ts';
import { requireRole, requireSession } from '../auth/middleware.ts';
import { validate } from './validate.ts';

/**
 * One declaration per API route: method, path, minimum role, zod schemas and the handler.
 * `mount` installs the role check and validation in front of every handler, so no route can
 * forget them, and the same list feeds the OpenAPI document and the role-matrix test.
 *
 * Route modules export `function xRoutes(ctx: AppContext): RouteDef[]`; paths are relative to
 * /api/v1 in Express syntax (`/plants/:plantId`).
 */
export interface RouteDef {
  method: 'get' | 'post' | 'put' | 'patch' | 'delete';
  path: string;
  /** Minimum role; 'public' routes need no credentials (only sign-in uses it). */
  role: Role | 'public';
  /** Session only: API tokens are refused (token and user management). */
  sessionOnly?: boolean;
  summary: string;
  tag: string;
  body?: z.ZodType;
  query?: z.ZodType;
  params?: z.ZodType;
  response?: z.ZodType;
  /** Status of a successful answer (default 200). */
  status?: number;
  /** Also answers text/csv (`?format=csv` or `Accept: text/csv`). */
  csv?: boolean;
  /** Content type when it is not JSON (e.g. text/event-stream). */
  produces?: string;
  /** Extra middleware after auth and validation (e.g. a body parser for CSV uploads). */
  before?: RequestHandler[];
  handler: (req: Request, res: Response) => unknown;
}

export function mount(router: Router, defs: RouteDef[]): void {
  for (const d of defs) {
    const chain: RequestHandler[] = [];
    if (d.role !== 'public') chain.push(requireRole(d.role));
    if (d.sessionOnly) chain.push(requireSession);
    if (d.before) chain.push(...d.before);
    if (d.body || d.query || d.params) chain.push(validate({ body: d.body, query: d.query, params: d.params }));
    chain.push(async (req, res) => {
      const out = await d.handler(req, res);
      if (res.headersSent || out === undefined) return;
      res.status(d.status ?? 200).json(out);
    });
    router[d.method](d.path, ...chain);
  }
}
