import { useState } from 'react';
import type { z } from 'zod';

/** Form values as typed, keyed by the request's dotted field path ("settling.svi_mLg"). */
export type FormValues = Record<string, string>;

export interface CalcFormSpec {
  /** Keys whose value is text (a select), sent as is; every other key is a number. */
  textKeys?: readonly string[];
  /** Keys that may be left blank (then left out of the request). */
  optionalKeys?: readonly string[];
}

type Built<T> = { ok: true; body: T } | { ok: false; errors: Record<string, string[]> };

function setPath(obj: Record<string, unknown>, path: string, value: unknown): void {
  const parts = path.split('.');
  let o = obj;
  for (const p of parts.slice(0, -1)) o = (o[p] ??= {}) as Record<string, unknown>;
  o[parts[parts.length - 1]!] = value;
}

/** Field errors keyed by dotted path, the same keys the server's 422 uses (server/http/validate.ts). */
export function zodFieldErrors(err: z.ZodError): Record<string, string[]> {
  const fields: Record<string, string[]> = {};
  for (const issue of err.issues) {
    const key = issue.path.length ? issue.path.join('.') : '_';
    (fields[key] ??= []).push(issue.message);
  }
  return fields;
}

/**
 * Builds a request body from typed strings and validates it with the very zod schema the
 * server uses (shared/contracts/calc.ts), so an operator sees the same field messages before
 * anything is sent. Blank required fields and non-numbers are caught first with plain words.
 */
export function buildRequest<S extends z.ZodType>(schema: S, values: FormValues, spec: CalcFormSpec): Built<z.input<S>> {
  const body: Record<string, unknown> = {};
  const errors: Record<string, string[]> = {};
  for (const [key, raw] of Object.entries(values)) {
    const s = raw.trim();
    if (s === '') {
      if (!spec.optionalKeys?.includes(key)) errors[key] = ['required'];
      continue;
    }
    if (spec.textKeys?.includes(key)) {
      setPath(body, key, s);
      continue;
    }
    // Digit-group spaces (also the narrow no-break space this view prints) are accepted.
    const n = Number(s.replace(/[\s\u202f]/g, ''));
    if (!Number.isFinite(n)) errors[key] = ['enter a number'];
    else setPath(body, key, n);
  }
  if (Object.keys(errors).length) return { ok: false, errors };
  const r = schema.safeParse(body);
  return r.success ? { ok: true, body: body as z.input<S> } : { ok: false, errors: zodFieldErrors(r.error) };
}

/** Form state of one calculator: the typed values, client-side errors, and the values the shown result belongs to. */
export function useCalcForm<S extends z.ZodType>(schema: S, initial: FormValues, spec: CalcFormSpec = {}) {
  const [values, setValues] = useState<FormValues>(initial);
  const [errors, setErrors] = useState<Record<string, string[]>>({});
  const [submitted, setSubmitted] = useState<FormValues | null>(null);
  return {
    values,
    errors,
    /** True when the inputs were edited after the result on screen was computed. */
    stale: submitted !== null && JSON.stringify(submitted) !== JSON.stringify(values),
    set(key: string, value: string) {
      setValues((v) => ({ ...v, [key]: value }));
    },
    /**
     * Validates the values (only the keys `include` accepts, e.g. the chosen settling variant);
     * on success remembers them and returns the body, otherwise shows the errors and returns null.
     */
    submit(include: (key: string) => boolean = () => true): z.input<S> | null {
      const picked = Object.fromEntries(Object.entries(values).filter(([k]) => include(k)));
      const b = buildRequest(schema, picked, spec);
      if (!b.ok) {
        setErrors(b.errors);
        setSubmitted(null);
        return null;
      }
      setErrors({});
      setSubmitted(values);
      return b.body;
    },
  };
}
