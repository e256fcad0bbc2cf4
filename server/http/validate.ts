import type { z } from 'zod';

/**
 * Field errors keyed by dotted path ("settling.v0_mh"); "_" for the object itself. Used for the
 * 422 of request validation (server/http/route.ts) and of row-by-row imports.
 */
export function zodFields(err: z.ZodError): Record<string, string[]> {
  const fields: Record<string, string[]> = {};
  for (const issue of err.issues) {
    const key = issue.path.length ? issue.path.join('.') : '_';
    (fields[key] ??= []).push(issue.message);
  }
  return fields;
}
