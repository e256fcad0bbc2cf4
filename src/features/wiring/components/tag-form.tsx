import { useEffect, useState } from 'react';
import { useForm, useWatch } from 'react-hook-form';
import type { PlantLayoutOut } from '../../../../shared/contracts/plant-api.ts';
import { SIGNAL_KINDS } from '../../../../shared/contracts/plant-layout.ts';
import { signalTargetType, TAG_KINDS, tagCreate, type SourceOut, type TagCreate } from '../../../../shared/contracts/wiring.ts';
import { Button, Field, FormProblem, Panel, Select, TextInput } from '../../../components/ui/controls.tsx';
import { applyServerErrors, contractResolver, fieldError, numberOrText, textOrNothing } from '../../../lib/form.ts';
import { usePlantLayout } from '../../plant/api/plants.ts';
import { usePutMapping } from '../api/signal-map.ts';
import { useCreateTag } from '../api/tags-config.ts';
import type { TagDraft } from './explore-panel.tsx';

type TagValues = Record<'name' | 'sourceId' | 'address' | 'unit' | 'description' | 'scaleGain' | 'scaleOffset' | 'deadband' | 'expectedPeriod_s' | 'rangeLow' | 'rangeHigh' | 'kind' | 'signal' | 'target', string>;
const EMPTY: TagValues = { name: '', sourceId: '', address: '', unit: '', description: '', scaleGain: '1', scaleOffset: '0', deadband: '0', expectedPeriod_s: '10', rangeLow: '', rangeHigh: '', kind: 'analog', signal: '', target: '' };

/** The tag part of the form as the create request (the process signal is a second request). */
function tagBody(v: TagValues): Record<string, unknown> {
  const body: Record<string, unknown> = {
    name: textOrNothing(v.name),
    sourceId: numberOrText(v.sourceId),
    address: textOrNothing(v.address),
    unit: textOrNothing(v.unit),
    description: v.description || undefined,
    scaleGain: numberOrText(v.scaleGain),
    scaleOffset: numberOrText(v.scaleOffset),
    deadband: numberOrText(v.deadband),
    expectedPeriod_s: numberOrText(v.expectedPeriod_s),
    rangeLow: numberOrText(v.rangeLow) ?? null,
    rangeHigh: numberOrText(v.rangeHigh) ?? null,
    kind: v.kind,
  };
  return Object.fromEntries(Object.entries(body).filter(([, x]) => x !== undefined));
}
const tagResolver = contractResolver(tagCreate, tagBody);

/** Codes a signal of this kind can be mapped to, from the plant layout. */
export function targetsFor(layout: PlantLayoutOut | undefined, signal: string): { code: string; name: string }[] {
  if (!layout || !signal) return [];
  const type = signalTargetType(signal as (typeof SIGNAL_KINDS)[number]);
  if (type === 'plant') return [{ code: layout.code, name: layout.name }];
  return layout.trains.flatMap((t) => (type === 'basin' ? t.basins : type === 'clarifier' ? t.clarifiers : t.pumps).map((x) => ({ code: x.code, name: x.name })));
}

/**
 * A new tag: address (prefilled from a discovered topic or a browsed node), unit, scaling
 * (engineering = raw × gain + offset), deadband, expected period, plausible range; and
 * optionally which process signal of which basin, clarifier, pump or the plant it is.
 * Checked in the browser with the server's own schema first, then by the server.
 */
export function TagForm({ plantId, sources, draft, onDone }: { plantId: number; sources: SourceOut[]; draft: TagDraft | null; onDone(): void }) {
  const create = useCreateTag(plantId);
  const map = usePutMapping(plantId);
  const layout = usePlantLayout(plantId);
  const form = useForm<TagValues, unknown, TagCreate>({ defaultValues: EMPTY, resolver: tagResolver });
  const { register, formState } = form;
  const [done, setDone] = useState<string | null>(null);
  useEffect(() => {
    if (draft) {
      form.reset({ ...EMPTY, sourceId: String(draft.sourceId), address: draft.address, name: draft.name ?? '', description: draft.description ?? '' });
      setDone(null);
    }
  }, [draft, form]);
  const signal = useWatch({ control: form.control, name: 'signal' });
  const fe = (name: keyof TagValues) => fieldError(formState.errors, name);

  const submit = form.handleSubmit(async (body) => {
    setDone(null);
    const { signal: kind, target } = form.getValues();
    if (kind && !target) return form.setError('target', { type: 'required', message: 'pick what this signal belongs to' });
    create.reset();
    map.reset();
    try {
      const tag = await create.mutateAsync(body);
      let mapped = '';
      if (kind) {
        const sk = kind as (typeof SIGNAL_KINDS)[number];
        const m = await map.mutateAsync({ signal: sk, targetType: signalTargetType(sk), targetCode: target, tagId: tag.id });
        mapped = ` as ${m.signal} of ${m.targetCode ?? target}${m.replacedTagId ? ` (replacing tag ${m.replacedTagId})` : ''}`;
      }
      setDone(`Tag ${tag.name} added${mapped}. Ingest applies it within seconds.`);
      form.reset(EMPTY);
      onDone();
    } catch (e) {
      // 422 field errors go beside their fields; anything else is said below the form.
      applyServerErrors(e, form);
    }
  });

  const targets = targetsFor(layout.data, signal);
  const num = (name: keyof TagValues) => ({ ...register(name), inputMode: 'decimal' as const, className: 'num', 'aria-invalid': formState.errors[name] ? true : undefined });
  return (
    <Panel title="New tag">
      <form onSubmit={(e) => void submit(e)} noValidate aria-label="New tag" className="grid grid-cols-[repeat(auto-fill,minmax(150px,1fr))] gap-2 items-start">
        <Field label="Source" error={fe('sourceId') ? ['pick a source'] : undefined}>
          <Select {...register('sourceId')}>
            <option value="">—</option>
            {sources.map((s) => (
              <option key={s.id} value={s.id}>
                {s.name}
              </option>
            ))}
          </Select>
        </Field>
        <div className="col-span-2">
          <Field label="Address" error={fe('address')} hint="MQTT topic or OPC UA NodeId">
            <TextInput {...register('address')} className="num w-full" />
          </Field>
        </div>
        <Field label="Tag name" error={fe('name')}>
          <TextInput {...register('name')} />
        </Field>
        <Field label="Unit" error={fe('unit')} hint="e.g. g/L, m3/h, m">
          <TextInput {...register('unit')} />
        </Field>
        <div className="col-span-2">
          <Field label="Description" error={fe('description')}>
            <TextInput {...register('description')} className="w-full" />
          </Field>
        </div>
        <Field label="Scale gain" error={fe('scaleGain')} hint="eng. = raw × gain + offset">
          <TextInput {...num('scaleGain')} />
        </Field>
        <Field label="Scale offset" error={fe('scaleOffset')}>
          <TextInput {...num('scaleOffset')} />
        </Field>
        <Field label="Deadband" error={fe('deadband')} hint="in the tag unit; 0 keeps every change">
          <TextInput {...num('deadband')} />
        </Field>
        <Field label="Expected period" unit="s" error={fe('expectedPeriod_s')} hint="stale after 3 periods">
          <TextInput {...num('expectedPeriod_s')} />
        </Field>
        <Field label="Range low" error={fe('rangeLow')}>
          <TextInput {...num('rangeLow')} />
        </Field>
        <Field label="Range high" error={fe('rangeHigh')}>
          <TextInput {...num('rangeHigh')} />
        </Field>
        <Field label="Kind" error={fe('kind')} hint="only analog values are checked for a flat line">
          <Select {...register('kind')}>
            {TAG_KINDS.map((k) => (
              <option key={k}>{k}</option>
            ))}
          </Select>
        </Field>
        <Field label="Process signal" error={fe('signal')}>
          <Select {...register('signal', { onChange: () => form.setValue('target', '') })}>
            <option value="">none</option>
            {SIGNAL_KINDS.map((k) => (
              <option key={k}>{k}</option>
            ))}
          </Select>
        </Field>
        <Field label="Of" error={fe('target')}>
          <Select {...register('target')} disabled={!signal} aria-label="Signal target">
            <option value="">—</option>
            {targets.map((t) => (
              <option key={t.code} value={t.code}>
                {t.code} · {t.name}
              </option>
            ))}
          </Select>
        </Field>
        <div className="col-span-full flex items-center gap-2">
          <Button kind="primary" type="submit" disabled={create.isPending || map.isPending}>
            Add tag
          </Button>
          {done ? (
            <span role="status" className="text-ink-2">
              {done}
            </span>
          ) : null}
        </div>
        <div className="col-span-full">
          <FormProblem error={create.error ?? map.error} root={formState.errors.root?.server?.message} />
        </div>
      </form>
    </Panel>
  );
}
