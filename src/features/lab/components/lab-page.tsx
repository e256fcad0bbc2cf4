import { useMemo, useState } from 'react';
import { LAB_KINDS, type LabKind, type LabResultOut } from '../../../../shared/contracts/lab.ts';
import { roleAtLeast } from '../../../../shared/contracts/roles.ts';
import { ErrorNote, Panel, Select } from '../../../components/ui/controls.tsx';
import { DataTable, useDataTable, type ColumnDef } from '../../../components/ui/data-table.tsx';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { formatUtc, formatValue } from '../../../lib/format.ts';
import { useMe } from '../../auth/api/me.ts';
import { useCurrentPlant, usePlantLayout } from '../../plant/api/plants.ts';
import { useLabResults } from '../api/lab-results.ts';
import { LabCsvUpload } from './lab-csv-upload.tsx';
import { LabEntryForm } from './lab-entry-form.tsx';

/** Lab (design §6): the daily settleability test and lab solids, by form or CSV, and the recent results. */
export default function LabPage() {
  const { plantId, isPending } = useCurrentPlant();
  const layout = usePlantLayout(plantId);
  const me = useMe();
  const canWrite = me.data ? roleAtLeast(me.data.role, 'operator') : false;
  const locations = useMemo(
    () => (layout.data?.trains ?? []).flatMap((t) => [...t.basins.map((b) => ({ code: b.code, name: b.name })), ...t.clarifiers.map((c) => ({ code: c.code, name: c.name }))]),
    [layout.data],
  );
  if (isPending) return <p className="p-2 text-ink-3">Loading plants…</p>;
  if (plantId === null) return <p className="p-2">No plant is configured yet.</p>;
  return (
    <div className="flex flex-col gap-2 min-w-[1200px] max-w-[1900px]">
      <header className="flex items-baseline gap-3 px-0.5 h-8">
        <h1 className="text-[15px] font-semibold">Lab results</h1>
        <span className="text-[12px] text-ink-3">SVI, DSVI and SSVI in mL/g (computed by the server from the readings), MLSS in g/L, TSS in mg/L. Results are flagged, never corrected.</span>
      </header>
      {canWrite ? (
        <div className="grid grid-cols-[3fr_2fr] gap-2 items-start">
          <SectionBoundary name="Lab entry">
            <LabEntryForm plantId={plantId} locations={locations} />
          </SectionBoundary>
          <SectionBoundary name="CSV upload">
            <LabCsvUpload plantId={plantId} />
          </SectionBoundary>
        </div>
      ) : (
        <p className="text-[12px] text-ink-3">Entering results needs the operator role.</p>
      )}
      <SectionBoundary name="Recent results">
        <RecentResults plantId={plantId} />
      </SectionBoundary>
    </div>
  );
}

type Details = { settledVolume_mLL?: number; mlss_gL?: number; dilutionFactor?: number; note?: string };

function readings(r: LabResultOut): string {
  const d = r.details as Details;
  const parts = [
    d.settledVolume_mLL !== undefined ? `settled ${formatValue(d.settledVolume_mLL, 3)} mL/L` : null,
    d.dilutionFactor !== undefined ? `dilution × ${formatValue(d.dilutionFactor, 3)}` : null,
    d.mlss_gL !== undefined && r.kind !== 'MLSS' ? `MLSS ${formatValue(d.mlss_gL, 3)} g/L` : null,
  ].filter(Boolean);
  return parts.join(' · ') || '—';
}

const LAB_COLUMNS: ColumnDef<LabResultOut>[] = [
  { id: 'sampledAt', header: 'Sampled (UTC)', accessorFn: (r) => Date.parse(r.sampledAt), meta: { width: '160px', cellClass: 'num' }, cell: ({ row: { original: r } }) => formatUtc(r.sampledAt) },
  { id: 'kind', header: 'Test', accessorKey: 'kind', meta: { width: '70px' } },
  {
    id: 'value',
    header: 'Result',
    accessorKey: 'value',
    meta: { width: '140px', align: 'right', cellClass: 'num pr-4' },
    cell: ({ row: { original: r } }) => (
      <>
        {formatValue(r.value, 3)} <span className="text-ink-3 text-[11px]">{r.unit}</span>
      </>
    ),
  },
  { id: 'location', header: 'Location', accessorFn: (r) => r.location ?? '', meta: { width: '100px', cellClass: 'num' }, cell: ({ row: { original: r } }) => r.location ?? '—' },
  { id: 'readings', header: 'Readings', accessorFn: readings, enableSorting: false, meta: { width: '330px', cellClass: 'num text-ink-2' } },
  {
    id: 'flags',
    header: 'Flags · note',
    accessorFn: (r) => [...r.flags, (r.details as Details).note].filter(Boolean).join(' · '),
    enableSorting: false,
    cell: ({ row: { original: r }, getValue }) => (
      <>
        {r.flags.length ? <span className="px-1 border border-estimated text-estimated text-[10px] mr-1">FLAG</span> : null}
        {getValue<string>()}
      </>
    ),
  },
];

/** The recent results, newest sample first; a column header sorts them (TanStack Table), the kind filter narrows them. */
function RecentResults({ plantId }: { plantId: number }) {
  const q = useLabResults(plantId);
  const [kind, setKind] = useState<LabKind | ''>('');
  const columnFilters = useMemo(() => (kind ? [{ id: 'kind', value: kind }] : []), [kind]);
  const table = useDataTable({
    data: q.data?.results ?? [],
    columns: LAB_COLUMNS,
    getRowId: (r) => String(r.id),
    initialState: { sorting: [{ id: 'sampledAt', desc: true }] },
    state: { columnFilters },
  });
  const rows = q.data?.results ?? [];
  return (
    <Panel
      title="Recent results (newest sample first)"
      actions={
        <Select value={kind} onChange={(e) => setKind(e.target.value as LabKind | '')} aria-label="Show test" className="h-6">
          <option value="">all tests</option>
          {LAB_KINDS.map((k) => (
            <option key={k}>{k}</option>
          ))}
        </Select>
      }
    >
      <ErrorNote error={q.error} />
      {q.isPending ? <p className="text-ink-3">Loading…</p> : null}
      {!q.isPending && !rows.length ? <p className="text-ink-3 text-[12px]">No lab result yet.</p> : null}
      {rows.length ? <DataTable table={table} label="Lab results" testId="lab-results" empty="No result of this test." rowProps={(r) => ({ 'data-kind': r.original.kind, className: 'border-b border-edge/60 h-6' })} /> : null}
    </Panel>
  );
}
