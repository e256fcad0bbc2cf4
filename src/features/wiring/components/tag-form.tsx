import { useEffect, useState, type FormEvent } from 'react';
import type { PlantLayoutOut } from '../../../../shared/contracts/plant-api.ts';
import { SIGNAL_KINDS } from '../../../../shared/contracts/plant-layout.ts';
import { signalTargetType, tagCreate, type SourceOut } from '../../../../shared/contracts/wiring.ts';
import { Button, ErrorNote, Field, fieldErrors, Panel, Select, TextInput } from '../../../components/ui/controls.tsx';
import { usePlantLayout } from '../../plant/api/plants.ts';
import { usePutMapping } from '../api/signal-map.ts';
import { useCreateTag } from '../api/tags-config.ts';
import type { TagDraft } from './explore-panel.tsx';

const EMPTY = { name: '', sourceId: '', address: '', unit: '', description: '', scaleGain: '1', scaleOffset: '0', deadband: '0', expectedPeriod_s: '10', rangeLow: '', rangeHigh: '', signal: '', target: '' };

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
  const [f, setF] = useState(EMPTY);
  const [local, setLocal] = useState<Record<string, string[]>>({});
  const [done, setDone] = useState<string | null>(null);
  useEffect(() => {
    if (draft) {
      setF({ ...EMPTY, sourceId: String(draft.sourceId), address: draft.address, name: draft.name ?? '', description: draft.description ?? '' });
      setLocal({});
      setDone(null);
    }
  }, [draft]);
  const set = (k: keyof typeof EMPTY) => (e: { target: { value: string } }) => setF((o) => ({ ...o, [k]: e.target.value }));
  const num = (s: string) => (s.trim() === '' ? undefined : Number(s));
  const fe = { ...fieldErrors(create.error), ...fieldErrors(map.error), ...local };

  const submit = async (e: FormEvent) => {
    e.preventDefault();
    setDone(null);
    const body = {
      name: f.name.trim(),
      sourceId: Number(f.sourceId),
      address: f.address.trim(),
      unit: f.unit.trim(),
      description: f.description,
      scaleGain: num(f.scaleGain),
      scaleOffset: num(f.scaleOffset),
      deadband: num(f.deadband),
      expectedPeriod_s: num(f.expectedPeriod_s),
      rangeLow: num(f.rangeLow) ?? null,
      rangeHigh: num(f.rangeHigh) ?? null,
    };
    const r = tagCreate.safeParse(body);
    const errs: Record<string, string[]> = {};
    if (!r.success)
      for (const i of r.error.issues) {
        const empty = i.code === 'too_small' && i.origin === 'string' && Number(i.minimum) === 1;
        (errs[i.path.join('.')] ??= []).push(empty ? 'required' : i.path[0] === 'sourceId' ? 'pick a source' : i.message);
      }
    if (f.signal && !f.target) errs.target = ['pick what this signal belongs to'];
    setLocal(errs);
    if (!r.success || Object.keys(errs).length) return;
    create.reset();
    map.reset();
    try {
      const tag = await create.mutateAsync(r.data);
      let mapped = '';
      if (f.signal) {
        const type = signalTargetType(f.signal as (typeof SIGNAL_KINDS)[number]);
        const m = await map.mutateAsync({ signal: f.signal as (typeof SIGNAL_KINDS)[number], targetType: type, targetCode: f.target, tagId: tag.id });
        mapped = ` as ${m.signal} of ${m.targetCode ?? f.target}${m.replacedTagId ? ` (replacing tag ${m.replacedTagId})` : ''}`;
      }
      setDone(`Tag ${tag.name} added${mapped}. Ingest applies it within seconds.`);
      setF(EMPTY);
      onDone();
    } catch {
      /* shown beside the fields or below */
    }
  };

  const targets = targetsFor(layout.data, f.signal);
  const otherError = (create.error && !Object.keys(fieldErrors(create.error)).length ? create.error : null) ?? (map.error && !Object.keys(fieldErrors(map.error)).length ? map.error : null);
  return (
    <Panel title="New tag">
      <form onSubmit={(e) => void submit(e)} aria-label="New tag" className="grid grid-cols-[repeat(auto-fill,minmax(150px,1fr))] gap-2 items-start">
        <Field label="Source" error={fe.sourceId}>
          <Select value={f.sourceId} onChange={set('sourceId')}>
            <option value="">—</option>
            {sources.map((s) => (
              <option key={s.id} value={s.id}>
                {s.name}
              </option>
            ))}
          </Select>
        </Field>
        <div className="col-span-2">
          <Field label="Address" error={fe.address} hint="MQTT topic or OPC UA NodeId">
            <TextInput value={f.address} onChange={set('address')} className="num w-full" />
          </Field>
        </div>
        <Field label="Tag name" error={fe.name}>
          <TextInput value={f.name} onChange={set('name')} />
        </Field>
        <Field label="Unit" error={fe.unit} hint="e.g. g/L, m3/h, m">
          <TextInput value={f.unit} onChange={set('unit')} />
        </Field>
        <div className="col-span-2">
          <Field label="Description" error={fe.description}>
            <TextInput value={f.description} onChange={set('description')} className="w-full" />
          </Field>
        </div>
        <Field label="Scale gain" error={fe.scaleGain} hint="eng. = raw × gain + offset">
          <TextInput value={f.scaleGain} onChange={set('scaleGain')} inputMode="decimal" className="num" />
        </Field>
        <Field label="Scale offset" error={fe.scaleOffset}>
          <TextInput value={f.scaleOffset} onChange={set('scaleOffset')} inputMode="decimal" className="num" />
        </Field>
        <Field label="Deadband" error={fe.deadband} hint="in the tag unit; 0 keeps every change">
          <TextInput value={f.deadband} onChange={set('deadband')} inputMode="decimal" className="num" />
        </Field>
        <Field label="Expected period" unit="s" error={fe.expectedPeriod_s} hint="stale after 3 periods">
          <TextInput value={f.expectedPeriod_s} onChange={set('expectedPeriod_s')} inputMode="decimal" className="num" />
        </Field>
        <Field label="Range low" error={fe.rangeLow}>
          <TextInput value={f.rangeLow} onChange={set('rangeLow')} inputMode="decimal" className="num" />
        </Field>
        <Field label="Range high" error={fe.rangeHigh}>
          <TextInput value={f.rangeHigh} onChange={set('rangeHigh')} inputMode="decimal" className="num" />
        </Field>
        <Field label="Process signal" error={fe.signal}>
          <Select value={f.signal} onChange={(e) => setF((o) => ({ ...o, signal: e.target.value, target: '' }))}>
            <option value="">none</option>
            {SIGNAL_KINDS.map((k) => (
              <option key={k}>{k}</option>
            ))}
          </Select>
        </Field>
        <Field label="Of" error={fe.target ?? fe.targetCode ?? fe.targetType}>
          <Select value={f.target} onChange={set('target')} disabled={!f.signal} aria-label="Signal target">
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
          <ErrorNote error={otherError} />
        </div>
      </form>
    </Panel>
  );
}
