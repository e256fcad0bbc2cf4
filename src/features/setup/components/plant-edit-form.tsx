import { useState } from 'react';
import { useForm } from 'react-hook-form';
import { plantPatch, type PlantModelOut, type PlantPatch, type UnitSystem } from '../../../../shared/contracts/plant-model.ts';
import { displayUnit } from '../../../../shared/domain/unit-systems.ts';
import { Button, Field, FormProblem, Select, TextInput } from '../../../components/ui/controls.tsx';
import { applyServerErrors, contractResolver, fieldError, numberOrText, textOrNothing } from '../../../lib/form.ts';
import { usePatchPlant } from '../api/setup.ts';
import { show } from './units.ts';

type Values = { name: string; timezone: string; peakFlow: string; unitSystem: UnitSystem; retired: boolean };
type Plant = PlantModelOut['plant'];

/**
 * The plant's own fields as a PATCH: the peak flow is typed in the unit system chosen in the form
 * (blank: not set, the storm flow then comes from the peak-flow factor) and sent SI; retiring
 * keeps the history and stops the engine from computing the plant.
 */
function toBody(plant: Plant) {
  return (v: Values) => {
    const peak = numberOrText(v.peakFlow);
    const body: Record<string, unknown> = {
      name: textOrNothing(v.name),
      timezone: textOrNothing(v.timezone),
      unitSystem: v.unitSystem,
      peakFlow_m3h: peak === undefined ? null : typeof peak === 'number' ? displayUnit(v.unitSystem, 'flowLarge_m3h').toSi(peak) : peak,
    };
    if (v.retired !== (plant.retiredAt !== null)) body.retiredAt = v.retired ? new Date().toISOString() : null;
    return body;
  };
}

export function PlantEditForm({ plant }: { plant: Plant }) {
  const patch = usePatchPlant(plant.id);
  const [open, setOpen] = useState(false);
  const defaults: Values = { name: plant.name, timezone: plant.timezone, peakFlow: show(plant.unitSystem, 'flowLarge_m3h', plant.peakFlow_m3h), unitSystem: plant.unitSystem, retired: plant.retiredAt !== null };
  const form = useForm<Values, unknown, PlantPatch>({ defaultValues: defaults, resolver: contractResolver(plantPatch, toBody(plant)) });
  const { register, handleSubmit, formState, watch, getValues, setValue, reset } = form;
  const system = watch('unitSystem');
  if (!open)
    return (
      <Button onClick={() => (reset(defaults), setOpen(true))} aria-label={`Edit plant ${plant.code}`}>
        Edit plant…
      </Button>
    );
  const onSubmit = handleSubmit((body) => patch.mutate(body, { onSuccess: () => setOpen(false), onError: (e) => applyServerErrors(e, form) }));
  const err = (n: keyof Values | 'peakFlow_m3h' | 'retiredAt') => fieldError(formState.errors, n);
  // Switching the unit system keeps the typed peak flow the same flow, in the new unit.
  const onSystem = (next: UnitSystem) => {
    const typed = numberOrText(getValues('peakFlow'));
    if (typeof typed === 'number') setValue('peakFlow', show(next, 'flowLarge_m3h', displayUnit(system, 'flowLarge_m3h').toSi(typed)));
  };
  return (
    <form onSubmit={(e) => void onSubmit(e)} className="flex flex-wrap items-end gap-2 mb-2" aria-label={`Edit plant ${plant.code}`} noValidate>
      <Field label="Name" error={err('name')}>
        <TextInput {...register('name')} className="w-48" />
      </Field>
      <Field label="Time zone" error={err('timezone')} hint="IANA name, e.g. America/Chicago">
        <TextInput {...register('timezone')} className="w-40" />
      </Field>
      <Field label="Unit system" error={err('unitSystem')}>
        <Select {...register('unitSystem', { onChange: (e: { target: { value: UnitSystem } }) => onSystem(e.target.value) })}>
          <option value="SI">SI</option>
          <option value="US">US customary</option>
        </Select>
      </Field>
      <Field label="Peak wet-weather flow" unit={displayUnit(system, 'flowLarge_m3h').unit} error={err('peakFlow') ?? err('peakFlow_m3h')} hint="blank: from the peak-flow factor">
        <TextInput {...register('peakFlow')} inputMode="decimal" className="w-24 num" />
      </Field>
      <label className="flex items-center gap-1 text-[12px] self-center" title="history stays; the balance engine stops computing this plant">
        <input type="checkbox" {...register('retired')} /> Retired
      </label>
      <Button type="submit" kind="primary" disabled={patch.isPending}>
        Save plant
      </Button>
      <Button kind="quiet" onClick={() => setOpen(false)}>
        Cancel
      </Button>
      <FormProblem error={patch.error} root={formState.errors.root?.server?.message ?? err('retiredAt')?.[0]} />
    </form>
  );
}
