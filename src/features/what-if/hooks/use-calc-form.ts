import { useState } from 'react';
import { useForm, useWatch } from 'react-hook-form';
import type { z } from 'zod';
import { contractResolver, fieldError, numberOrText, textOrNothing } from '../../../lib/form.ts';

/** Form values as typed; nested where the request is ("settling.svi_mLg" is settling → svi_mLg). */
export type FormValues = { [key: string]: string | FormValues };

export interface CalcFormSpec {
  /** Dotted keys whose value is text (a select), sent as is; every other key is a number. */
  textKeys?: readonly string[];
  /** Which dotted keys of these values go into the request (e.g. only the chosen settling variant); default all. */
  include?: (values: FormValues) => (key: string) => boolean;
}

/**
 * The request body from typed values: numbers where the schema has numbers, blanks left out (the
 * schema says whether that is allowed), keys `include` rejects dropped.
 */
export function buildBody(values: FormValues, spec: CalcFormSpec): Record<string, unknown> {
  const keep = spec.include?.(values) ?? (() => true);
  const walk = (v: FormValues, prefix: string): Record<string, unknown> => {
    const out: Record<string, unknown> = {};
    for (const [k, raw] of Object.entries(v)) {
      const key = prefix + k;
      if (typeof raw !== 'string') {
        const inner = walk(raw, `${key}.`);
        if (Object.keys(inner).length) out[k] = inner;
        continue;
      }
      if (!keep(key)) continue;
      const x = spec.textKeys?.includes(key) ? textOrNothing(raw) : numberOrText(raw);
      if (x !== undefined) out[k] = x;
    }
    return out;
  };
  return walk(values, '');
}

/**
 * One calculator's form (react-hook-form): typed values checked with the very zod schema the
 * server uses (shared/contracts/calc.ts), so an operator sees the same field messages before
 * anything is sent; `stale` says the inputs changed after the result on screen was computed.
 */
export function useCalcForm<S extends z.ZodType>(schema: S, initial: FormValues, spec: CalcFormSpec = {}) {
  const form = useForm<FormValues, unknown, z.output<S>>({ defaultValues: initial, resolver: contractResolver(schema, (v: FormValues) => buildBody(v, spec)) });
  const values = useWatch({ control: form.control });
  const [submitted, setSubmitted] = useState<string | null>(null);
  return {
    form,
    /** True when the inputs were edited after the result on screen was computed. */
    stale: submitted !== null && submitted !== JSON.stringify(values),
    /** The field's message, client- or server-side. */
    error: (name: string) => fieldError(form.formState.errors, name),
    /** Submit handler: the validated body to `onValid`, or the errors shown and `onInvalid` called. */
    onSubmit(onValid: (body: z.output<S>) => void, onInvalid: () => void) {
      return form.handleSubmit(
        (body) => {
          setSubmitted(JSON.stringify(form.getValues()));
          onValid(body);
        },
        () => {
          setSubmitted(null);
          onInvalid();
        },
      );
    },
  };
}
