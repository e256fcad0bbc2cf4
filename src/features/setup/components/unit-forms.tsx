import { useForm } from 'react-hook-form';
import type { z } from 'zod';
import { basinCreate, basinPatch, clarifierCreate, clarifierPatch, pumpCreate, pumpPatch, trainCreate, type PlantModelOut, type UnitSystem } from '../../../../shared/contracts/plant-model.ts';
import { Button, Field, FormProblem, Select, TextInput } from '../../../components/ui/controls.tsx';
import { applyServerErrors, contractResolver, fieldError, numberOrText, textOrNothing } from '../../../lib/form.ts';
import { useCreateUnit, usePatchUnit, type UnitCollection } from '../api/setup.ts';
import { BASIN_FIELDS, CLARIFIER_FIELDS, localInput, PUMP_FIELDS, show, toSi, unitLabel, type GeomField } from './units.ts';

export type UnitKind = 'train' | 'basin' | 'clarifier' | 'pump';
const COLLECTION: Record<UnitKind, UnitCollection> = { train: 'trains', basin: 'basins', clarifier: 'clarifiers', pump: 'pumps' };
const FIELDS: Record<UnitKind, GeomField[]> = { train: [], basin: BASIN_FIELDS, clarifier: CLARIFIER_FIELDS, pump: PUMP_FIELDS };
const CREATE: Record<UnitKind, z.ZodType<object>> = { train: trainCreate, basin: basinCreate, clarifier: clarifierCreate, pump: pumpCreate };
const PATCH: Record<Exclude<UnitKind, 'train'>, z.ZodType<object>> = { basin: basinPatch, clarifier: clarifierPatch, pump: pumpPatch };

type Values = Record<string, string | boolean>;

/** Typed geometry → SI numbers (blank optional fields left out). */
function geometry(system: UnitSystem, fields: GeomField[], v: Values): Record<string, unknown> {
  const out: Record<string, unknown> = {};
  for (const f of fields) out[f.name] = toSi(system, f.quantity, numberOrText(String(v[f.name] ?? '')));
  return out;
}
const effectiveFrom = (v: Values) => {
  const s = textOrNothing(String(v.effectiveFrom ?? ''));
  const d = s ? new Date(s) : null;
  return d && !Number.isNaN(d.getTime()) ? d.toISOString() : s;
};

/** Adds a train, basin, clarifier or pump; geometry typed in the plant's unit system. */
export function AddUnitForm({ plantId, kind, model, system }: { plantId: number; kind: UnitKind; model: PlantModelOut; system: UnitSystem }) {
  const create = useCreateUnit(plantId, COLLECTION[kind]);
  const fields = FIELDS[kind];
  const trains = model.trains;
  const clarifiers = trains.flatMap((t) => t.clarifiers);
  const defaults: Values = { code: '', name: '', trainId: String(trains[0]?.id ?? ''), kind: 'ras', clarifierId: '', aeratedFraction: '1', count: '1' };
  const toBody = (v: Values) => {
    const base: Record<string, unknown> = { code: textOrNothing(String(v.code)), name: textOrNothing(String(v.name)) };
    if (kind === 'train') return base;
    const body = { ...base, ...geometry(system, fields, v) };
    if (kind === 'pump') {
      const clarifierId = v.clarifierId ? Number(v.clarifierId) : null;
      return { ...body, kind: v.kind, clarifierId, trainId: clarifierId === null ? Number(v.trainId) || undefined : undefined };
    }
    return { ...body, trainId: Number(v.trainId) || undefined };
  };
  const form = useForm<Values, unknown, object>({ defaultValues: defaults, resolver: contractResolver(CREATE[kind], toBody) });
  const { register, handleSubmit, formState, reset } = form;
  const onSubmit = handleSubmit((body) => create.mutate(body, { onSuccess: () => reset(defaults), onError: (e) => applyServerErrors(e, form) }));
  const err = (n: string) => fieldError(formState.errors, n);
  const trainField = (
    <Field label="Train" error={err('trainId')}>
      <Select {...register('trainId')}>
        {trains.map((t) => (
          <option key={t.id} value={t.id}>
            {t.code}
          </option>
        ))}
      </Select>
    </Field>
  );
  return (
    <form onSubmit={onSubmit} className="flex flex-wrap items-end gap-2" aria-label={`New ${kind}`} noValidate>
      {kind !== 'train' ? (
        kind === 'pump' ? (
          <>
            <Field label="Kind">
              <Select {...register('kind')}>
                <option value="ras">RAS</option>
                <option value="was">WAS</option>
              </Select>
            </Field>
            <Field label="Serves clarifier" error={err('clarifierId')}>
              <Select {...register('clarifierId')}>
                <option value="">— the train —</option>
                {clarifiers.map((c) => (
                  <option key={c.id} value={c.id}>
                    {c.code}
                  </option>
                ))}
              </Select>
            </Field>
            {trainField}
          </>
        ) : (
          trainField
        )
      ) : null}
      <Field label="Code" error={err('code')}>
        <TextInput {...register('code')} className="w-20" />
      </Field>
      <Field label="Name" error={err('name')}>
        <TextInput {...register('name')} className="w-32" />
      </Field>
      {fields.map((f) => (
        <Field key={f.name} label={f.label} unit={unitLabel(system, f)} error={err(f.name)}>
          <TextInput {...register(f.name)} inputMode="decimal" className="w-24 num" placeholder={f.optional ? 'optional' : undefined} />
        </Field>
      ))}
      <Button type="submit" kind="primary" disabled={create.isPending}>
        Add {kind}
      </Button>
      <FormProblem error={create.error} root={formState.errors.root?.server?.message} />
    </form>
  );
}

/** A geometry edit or a change of service: a new version from "effective from" (default now); earlier balances keep the old one. */
export function EditUnitForm({ plantId, kind, unit, system, onDone }: { plantId: number; kind: Exclude<UnitKind, 'train'>; unit: Record<string, unknown> & { id: number; code: string; inService: boolean }; system: UnitSystem; onDone(): void }) {
  const patch = usePatchUnit(plantId, COLLECTION[kind]);
  const fields = FIELDS[kind];
  const defaults: Values = { effectiveFrom: localInput(new Date()), inService: unit.inService };
  for (const f of fields) defaults[f.name] = show(system, f.quantity, unit[f.name] as number | null);
  // The field shows now to the minute; left as shown it means "now" (the server's clock), not the
  // start of the minute, which could fall before a version made seconds ago.
  const toBody = (v: Values) => ({ ...geometry(system, fields, v), inService: v.inService === true, effectiveFrom: v.effectiveFrom === defaults.effectiveFrom ? undefined : effectiveFrom(v) });
  const form = useForm<Values, unknown, object>({ defaultValues: defaults, resolver: contractResolver(PATCH[kind], toBody) });
  const { register, handleSubmit, formState } = form;
  const onSubmit = handleSubmit((body) => patch.mutate({ id: unit.id, body }, { onSuccess: onDone, onError: (e) => applyServerErrors(e, form) }));
  const err = (n: string) => fieldError(formState.errors, n);
  return (
    <form onSubmit={onSubmit} className="flex flex-wrap items-end gap-2 border border-edge bg-white p-2" aria-label={`Edit ${unit.code}`} noValidate>
      <span className="self-center text-[12px] font-semibold">{unit.code}</span>
      {fields.map((f) => (
        <Field key={f.name} label={f.label} unit={unitLabel(system, f)} error={err(f.name)}>
          <TextInput {...register(f.name)} inputMode="decimal" className="w-24 num" />
        </Field>
      ))}
      <label className="flex items-center gap-1 text-[12px] self-center">
        <input type="checkbox" {...register('inService')} /> In service
      </label>
      <Field label="Effective from" error={err('effectiveFrom')} hint="balances before this keep the old geometry">
        <TextInput type="datetime-local" {...register('effectiveFrom')} />
      </Field>
      <Button type="submit" kind="primary" disabled={patch.isPending}>
        Save {unit.code}
      </Button>
      <Button kind="quiet" onClick={onDone}>
        Cancel
      </Button>
      <FormProblem error={patch.error} root={formState.errors.root?.server?.message} />
    </form>
  );
}
