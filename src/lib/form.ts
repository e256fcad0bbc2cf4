import { zodResolver } from '@hookform/resolvers/zod';
import { get, type FieldErrors, type FieldPath, type FieldValues, type Resolver, type UseFormReturn } from 'react-hook-form';
import { z } from 'zod';
import { ApiError, hasFieldErrors } from './api-client.ts';

/**
 * Forms hold what was typed (text); the request is built from it and checked with the very zod
 * schema the server validates with (shared/contracts), through react-hook-form's zod resolver.
 * A field left blank reaches the schema as missing, so the schema alone decides whether it is
 * required; a field that does not read as a number reaches it as text.
 */

/** The issues a typed form produces said in plain words; every other message is the schema's own. */
function plainWords(issue: z.core.$ZodRawIssue): string | undefined {
  if (issue.code !== 'invalid_type') return undefined;
  if (issue.input === undefined || issue.input === '') return 'required';
  if (issue.expected === 'number' && typeof issue.input === 'string') return 'enter a number';
  return undefined;
}

/**
 * A resolver that turns the typed values into the request body (`toBody`) and validates that with
 * the contract schema; the form's submit handler receives the schema's output, ready to send.
 */
export function contractResolver<V extends FieldValues, S extends z.ZodType>(schema: S, toBody: (values: V) => unknown): Resolver<V, unknown, z.output<S>> {
  const resolver = zodResolver(z.preprocess((v: V) => toBody(v), schema), { error: plainWords });
  return resolver as unknown as Resolver<V, unknown, z.output<S>>;
}

/** Typed text as a number: blank → undefined (left out), digit-group spaces accepted, anything else kept as text for the schema to refuse. */
export function numberOrText(raw: string | undefined): number | string | undefined {
  const s = (raw ?? '').trim();
  if (s === '') return undefined;
  // Digit-group spaces (also the narrow no-break space the monitor prints) and a decimal comma are accepted.
  const n = Number(s.replace(/[\s\u202f]/g, '').replace(',', '.'));
  return Number.isFinite(n) ? n : s;
}

/** Blank text → undefined (left out of the request), otherwise the text trimmed. */
export function textOrNothing(raw: string | undefined): string | undefined {
  const s = (raw ?? '').trim();
  return s === '' ? undefined : s;
}

/** The message of one field (dotted path) as the list Field shows. */
export function fieldError<V extends FieldValues>(errors: FieldErrors<V>, name: string): string[] | undefined {
  const e = get(errors, name) as { message?: unknown } | undefined;
  return typeof e?.message === 'string' && e.message ? [e.message] : undefined;
}

/**
 * A 422's `fields` (dotted paths, server/http/validate.ts) put beside the form's own fields with
 * `setError`; a path the form has no field for goes to `root.server`, so no message is lost.
 */
export function applyServerErrors<V extends FieldValues, O>(error: unknown, form: Pick<UseFormReturn<V, unknown, O>, 'setError' | 'getValues'>): void {
  if (!hasFieldErrors(error)) return;
  const values = form.getValues();
  const other: string[] = [];
  for (const [path, messages] of Object.entries((error as ApiError).fields!)) {
    if (path && get(values, path) !== undefined) form.setError(path as FieldPath<V>, { type: 'server', message: messages.join('; ') });
    else other.push(path === '_' || path === '' ? messages.join('; ') : `${path}: ${messages.join('; ')}`);
  }
  if (other.length) form.setError('root.server', { type: 'server', message: other.join(' · ') });
}

/** A 422's field errors by dotted path (empty for any other error), for views that are no form (e.g. a CSV upload's rows). */
export function serverFieldErrors(error: unknown): Record<string, string[]> {
  return error instanceof ApiError && error.fields ? error.fields : {};
}
