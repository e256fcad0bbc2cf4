import type { NextFunction, Request, Response } from 'express';
import type { z } from 'zod';
import { ValidationError } from './errors.ts';

/** Field errors keyed by dotted path ("settling.v0_mh"); "_" for the object itself. */
export function zodFields(err: z.ZodError): Record<string, string[]> {
  const fields: Record<string, string[]> = {};
  for (const issue of err.issues) {
    const key = issue.path.length ? issue.path.join('.') : '_';
    (fields[key] ??= []).push(issue.message);
  }
  return fields;
}

export interface Validated {
  body?: unknown;
  query?: unknown;
  params?: unknown;
}

declare module 'express-serve-static-core' {
  interface Request {
    valid: Validated;
  }
}

type Schemas = { body?: z.ZodType; query?: z.ZodType; params?: z.ZodType };

/**
 * Validates body, query and params with zod before the handler runs; the parsed values are on
 * `req.valid`. Any failure is a 422 with every field named; the handler never sees bad input.
 */
export function validate(schemas: Schemas) {
  return (req: Request, _res: Response, next: NextFunction) => {
    const fields: Record<string, string[]> = {};
    req.valid = {};
    for (const part of ['params', 'query', 'body'] as const) {
      const schema = schemas[part];
      if (!schema) continue;
      const r = schema.safeParse(part === 'body' ? (req.body ?? {}) : req[part]);
      if (r.success) req.valid[part] = r.data;
      else Object.assign(fields, zodFields(r.error));
    }
    if (Object.keys(fields).length) return next(new ValidationError(fields));
    next();
  };
}

/** Typed access to what `validate` parsed. */
export function valid<T extends z.ZodType>(req: Request, part: keyof Validated, _schema: T): z.infer<T> {
  return req.valid[part] as z.infer<T>;
}
