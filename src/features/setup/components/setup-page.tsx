import { useMemo, useState } from 'react';
import { useForm } from 'react-hook-form';
import { plantCreate, type PlantCreate, type PlantModelOut, type UnitSystem } from '../../../../shared/contracts/plant-model.ts';
import { roleAtLeast } from '../../../../shared/contracts/roles.ts';
import { figureNeeds, FIGURE_LABELS, type NeedsMapping } from '../../../../shared/domain/figure-needs.ts';
import { displayUnit } from '../../../../shared/domain/unit-systems.ts';
import { Button, ErrorNote, Field, FormProblem, Panel, Select, TextInput } from '../../../components/ui/controls.tsx';
import { DataTable, useDataTable, type ColumnDef } from '../../../components/ui/data-table.tsx';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { applyServerErrors, contractResolver, fieldError, numberOrText, textOrNothing } from '../../../lib/form.ts';
import { useMe } from '../../auth/api/me.ts';
import { useCurrentPlant } from '../../plant/api/plants.ts';
import { PlantPicker } from '../../signals/components/plant-picker.tsx';
import { useTagsConfig } from '../../wiring/api/tags-config.ts';
import { useCreatePlant, usePlantModel } from '../api/setup.ts';
import { ConfigPanel } from './config-panel.tsx';
import { FlowSchematic } from './flow-schematic.tsx';
import { PlantEditForm } from './plant-edit-form.tsx';
import { SettingsPanel } from './settings-panel.tsx';
import { AddUnitForm, EditUnitForm, type UnitKind } from './unit-forms.tsx';
import { BASIN_FIELDS, CLARIFIER_FIELDS, PUMP_FIELDS, show, unitLabel, type GeomField } from './units.ts';

/** Plant setup (integrator+): the process model, what each figure still needs, the plant's settings and its configuration document. */
export default function SetupPage() {
  const { plantId, plants, setPlantId } = useCurrentPlant();
  const me = useMe();
  if (me.data && !roleAtLeast(me.data.role, 'integrator')) return <p className="p-2 text-ink-2">Plant setup needs the integrator role (you are {me.data.role}).</p>;
  return (
    <div className="flex flex-col gap-2">
      <div className="flex items-center gap-3">
        <h1 className="text-[15px] font-semibold">Plant setup</h1>
        <PlantPicker plants={plants} plantId={plantId} onChange={setPlantId} />
        <span className="text-[12px] text-ink-3">Describes the plant for the balance; nothing here writes to the control system.</span>
      </div>
      <SectionBoundary name="New plant">
        <NewPlantForm onCreated={setPlantId} first={plants.length === 0} />
      </SectionBoundary>
      {plantId === null ? <p className="text-ink-3">No plant yet: describe one above.</p> : <PlantSetup key={plantId} plantId={plantId} isAdmin={!!me.data && roleAtLeast(me.data.role, 'admin')} />}
    </div>
  );
}

type PlantValues = { code: string; name: string; timezone: string; peakFlow: string; unitSystem: UnitSystem };

function NewPlantForm({ onCreated, first }: { onCreated(id: number): void; first: boolean }) {
  const create = useCreatePlant();
  const [open, setOpen] = useState(false);
  const defaults: PlantValues = { code: '', name: '', timezone: Intl.DateTimeFormat().resolvedOptions().timeZone || 'UTC', peakFlow: '', unitSystem: 'SI' };
  const toBody = (v: PlantValues) => {
    const peak = numberOrText(v.peakFlow);
    return { code: textOrNothing(v.code), name: textOrNothing(v.name), timezone: textOrNothing(v.timezone), unitSystem: v.unitSystem, peakFlow_m3h: typeof peak === 'number' ? displayUnit(v.unitSystem, 'flowLarge_m3h').toSi(peak) : peak };
  };
  const form = useForm<PlantValues, unknown, PlantCreate>({ defaultValues: defaults, resolver: contractResolver(plantCreate, toBody) });
  const { register, handleSubmit, formState, reset, watch } = form;
  const system = watch('unitSystem');
  if (!open && !first)
    return (
      <Button onClick={() => setOpen(true)} className="self-start">
        New plant…
      </Button>
    );
  const onSubmit = handleSubmit((body) =>
    create.mutate(body, {
      onSuccess: (p) => {
        reset(defaults);
        setOpen(false);
        onCreated(p.id);
      },
      onError: (e) => applyServerErrors(e, form),
    }),
  );
  const err = (n: keyof PlantValues | 'peakFlow_m3h') => fieldError(formState.errors, n);
  return (
    <Panel title="New plant">
      <form onSubmit={onSubmit} className="flex flex-wrap items-end gap-2" aria-label="New plant" noValidate>
        <Field label="Code" error={err('code')}>
          <TextInput {...register('code')} className="w-24" />
        </Field>
        <Field label="Name" error={err('name')}>
          <TextInput {...register('name')} className="w-48" />
        </Field>
        <Field label="Time zone" error={err('timezone')}>
          <TextInput {...register('timezone')} className="w-40" />
        </Field>
        <Field label="Unit system">
          <Select {...register('unitSystem')}>
            <option value="SI">SI</option>
            <option value="US">US customary</option>
          </Select>
        </Field>
        <Field label="Peak wet-weather flow" unit={displayUnit(system, 'flowLarge_m3h').unit} error={err('peakFlow') ?? err('peakFlow_m3h')}>
          <TextInput {...register('peakFlow')} inputMode="decimal" className="w-24 num" placeholder="optional" />
        </Field>
        <Button type="submit" kind="primary" disabled={create.isPending}>
          Create plant
        </Button>
        {!first ? (
          <Button kind="quiet" onClick={() => setOpen(false)}>
            Cancel
          </Button>
        ) : null}
        <FormProblem error={create.error} root={formState.errors.root?.server?.message} />
      </form>
    </Panel>
  );
}

function PlantSetup({ plantId, isAdmin }: { plantId: number; isAdmin: boolean }) {
  const model = usePlantModel(plantId);
  const tags = useTagsConfig(plantId);
  if (model.isPending) return <p className="text-ink-3">Loading the plant…</p>;
  if (!model.data) return <ErrorNote error={model.error} />;
  const m = model.data;
  const system = m.plant.unitSystem;
  const mappings: Array<NeedsMapping & { tag: string }> = (tags.data ?? []).flatMap((t) => t.signals.map((s) => ({ signal: s.signal as NeedsMapping['signal'], targetType: s.targetType as NeedsMapping['targetType'], targetId: s.targetId, tag: t.name })));
  return (
    <div className="grid grid-cols-1 xl:grid-cols-[minmax(0,3fr)_minmax(0,2fr)] gap-2">
      <div className="flex flex-col gap-2">
        <Panel title={`${m.plant.name} (${m.plant.code}) · ${system === 'US' ? 'US customary' : 'SI'} units`}>
          <p className="text-[12px] text-ink-2 mb-1">
            Peak wet-weather flow: <span className="num">{m.plant.peakFlow_m3h === null ? 'not set (storm flow from the peak-flow factor)' : `${show(system, 'flowLarge_m3h', m.plant.peakFlow_m3h)} ${displayUnit(system, 'flowLarge_m3h').unit}`}</span> · time zone {m.plant.timezone}
            {m.plant.retiredAt ? <span className="font-semibold"> · retired {m.plant.retiredAt} (history kept, not computed)</span> : null}
          </p>
          <PlantEditForm key={`${m.plant.name}|${m.plant.timezone}|${m.plant.unitSystem}|${m.plant.peakFlow_m3h}|${m.plant.retiredAt}`} plant={m.plant} />
          <AddUnitForm plantId={plantId} kind="train" model={m} system={system} />
        </Panel>
        <UnitTable plantId={plantId} kind="basin" title="Aeration basins" model={m} system={system} fields={BASIN_FIELDS} mappings={mappings} />
        <UnitTable plantId={plantId} kind="clarifier" title="Secondary clarifiers" model={m} system={system} fields={CLARIFIER_FIELDS} mappings={mappings} />
        <UnitTable plantId={plantId} kind="pump" title="RAS and WAS pumps" model={m} system={system} fields={PUMP_FIELDS} mappings={mappings} />
      </div>
      <div className="flex flex-col gap-2">
        <Panel title="Flow path">
          <FlowSchematic model={m} />
        </Panel>
        <NeedsPanel model={m} mappings={mappings} />
        <SectionBoundary name="Settings">
          <SettingsPanel plantId={plantId} isAdmin={isAdmin} />
        </SectionBoundary>
        <SectionBoundary name="Configuration document">
          <ConfigPanel plantId={plantId} code={m.plant.code} />
        </SectionBoundary>
      </div>
    </div>
  );
}

interface UnitRow {
  id: number;
  train: string;
  code: string;
  name: string;
  inService: boolean;
  effectiveFrom: string;
  signals: string;
  kind?: string;
  unit: Record<string, unknown> & { id: number; code: string; inService: boolean };
}

function UnitTable({ plantId, kind, title, model, system, fields, mappings }: { plantId: number; kind: Exclude<UnitKind, 'train'>; title: string; model: PlantModelOut; system: UnitSystem; fields: GeomField[]; mappings: Array<NeedsMapping & { tag: string }> }) {
  const [editing, setEditing] = useState<number | null>(null);
  const rows = useMemo<UnitRow[]>(
    () =>
      model.trains.flatMap((t) =>
        (kind === 'basin' ? t.basins : kind === 'clarifier' ? t.clarifiers : t.pumps).map((u) => ({
          id: u.id,
          train: t.code,
          code: u.code,
          name: u.name,
          inService: u.inService,
          effectiveFrom: u.effectiveFrom,
          kind: 'kind' in u ? u.kind.toUpperCase() : undefined,
          signals: mappings
            .filter((x) => x.targetType === kind && x.targetId === u.id)
            .map((x) => `${x.signal.split('.')[1]}: ${x.tag}`)
            .join(', '),
          unit: u,
        })),
      ),
    [model, kind, mappings],
  );
  const columns = useMemo<ColumnDef<UnitRow>[]>(
    () => [
      { accessorKey: 'train', header: 'Train', meta: { width: '4rem' } },
      { accessorKey: 'code', header: 'Code', meta: { width: '5rem' } },
      ...(kind === 'pump' ? [{ accessorKey: 'kind', header: 'Kind', meta: { width: '3.5rem' } } satisfies ColumnDef<UnitRow>] : []),
      { accessorKey: 'name', header: 'Name' },
      ...fields.map(
        (f): ColumnDef<UnitRow> => ({
          id: f.name,
          header: unitLabel(system, f) ? `${f.label} [${unitLabel(system, f)}]` : f.label,
          accessorFn: (r) => r.unit[f.name] as number | null,
          cell: (c) => <span className="num">{show(system, f.quantity, c.getValue() as number | null) || '—'}</span>,
          meta: { align: 'right', width: '7rem' },
        }),
      ),
      { accessorKey: 'inService', header: 'State', cell: (c) => (c.getValue() ? 'in service' : <span className="text-unavailable">out of service</span>), meta: { width: '6.5rem' } },
      { accessorKey: 'signals', header: 'Mapped signals', cell: (c) => (c.getValue() as string) || <span className="text-ink-3">none</span> },
      {
        id: 'edit',
        header: () => <span className="sr-only">Edit</span>,
        enableSorting: false,
        cell: (c) => (
          <Button kind="quiet" onClick={() => setEditing(c.row.original.id)} aria-label={`Edit ${c.row.original.code}`}>
            Edit
          </Button>
        ),
        meta: { width: '3.5rem' },
      },
    ],
    [fields, kind, system],
  );
  const table = useDataTable({ data: rows, columns, getRowId: (r) => String(r.id) });
  const editRow = rows.find((r) => r.id === editing);
  return (
    <Panel title={title}>
      <DataTable table={table} label={title} testId={`${kind}-table`} rowProps={(r) => ({ 'data-code': r.original.code })} empty={<span className="text-ink-3">None yet.</span>} />
      {editRow ? <EditUnitForm key={editRow.id} plantId={plantId} kind={kind} unit={editRow.unit} system={system} onDone={() => setEditing(null)} /> : null}
      <div className="mt-2">{model.trains.length ? <AddUnitForm plantId={plantId} kind={kind} model={model} system={system} /> : <span className="text-[12px] text-ink-3">Add a train first.</span>}</div>
    </Panel>
  );
}

function NeedsPanel({ model, mappings }: { model: PlantModelOut; mappings: NeedsMapping[] }) {
  const needs = figureNeeds(
    { peakFlow_m3h: model.plant.peakFlow_m3h, trains: model.trains.map((t) => ({ id: t.id, code: t.code, basins: t.basins, clarifiers: t.clarifiers, pumps: t.pumps })) },
    mappings,
    null,
  );
  const missing = needs.filter((n) => n.missing.length);
  return (
    <Panel title="What the figures still need">
      {model.trains.length === 0 ? <p className="text-[12px] text-ink-3">No train yet.</p> : null}
      {model.trains.length > 0 && missing.length === 0 ? <p className="text-[12px] text-ink-2">Every figure of every train has its geometry and mapped signals (the RAS margin and storm projection also need an SVI from the lab).</p> : null}
      <ul className="text-[12px] flex flex-col gap-0.5" data-testid="figure-needs">
        {missing.map((n) => (
          <li key={`${n.train}-${n.figure}`}>
            <span className="font-semibold">
              {FIGURE_LABELS[n.figure]} of train {n.train}
            </span>{' '}
            needs {n.missing.join(', ')}
          </li>
        ))}
      </ul>
    </Panel>
  );
}
