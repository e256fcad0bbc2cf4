import { useMemo, useState } from 'react';
import type { TagConfigOut } from '../../../../shared/contracts/wiring.ts';
import { Button, ErrorNote, Panel, TextInput } from '../../../components/ui/controls.tsx';
import { DataTable, useDataTable, type ColumnDef } from '../../../components/ui/data-table.tsx';
import { prettyUnit } from '../../../lib/format.ts';
import { useDeleteMapping } from '../api/signal-map.ts';
import { useTagsConfig } from '../api/tags-config.ts';

const ROW_H = 28;

const targetOf = (s: TagConfigOut['signals'][number]) => s.targetCode ?? `${s.targetType} ${s.targetId}`;

function tagColumns(unmap: (mappingId: number) => void): ColumnDef<TagConfigOut>[] {
  return [
    {
      id: 'name',
      header: 'Tag',
      accessorKey: 'name',
      meta: { width: '13%', cellClass: 'truncate' },
      cell: ({ row: { original: t } }) => (
        <>
          {t.name}
          {!t.enabled ? <span className="text-ink-3"> (disabled)</span> : null}
        </>
      ),
    },
    { id: 'source', header: 'Source', accessorFn: (t) => t.source.name, meta: { width: '10%', cellClass: 'text-ink-2 truncate' } },
    { id: 'address', header: 'Address', accessorKey: 'address', meta: { width: '22%', cellClass: 'num truncate' }, cell: ({ getValue }) => <span title={getValue<string>()}>{getValue<string>()}</span> },
    { id: 'unit', header: 'Unit', accessorKey: 'unit', meta: { width: '64px', cellClass: 'text-ink-2' }, cell: ({ getValue }) => prettyUnit(getValue<string>()) },
    { id: 'scale', header: 'Gain · offset', accessorKey: 'scaleGain', enableSorting: false, meta: { width: '100px', align: 'right', cellClass: 'num' }, cell: ({ row: { original: t } }) => `${t.scaleGain} · ${t.scaleOffset}` },
    { id: 'period', header: 'Period [s]', accessorKey: 'expectedPeriod_s', meta: { width: '90px', align: 'right', cellClass: 'num' } },
    {
      id: 'range',
      header: 'Range',
      enableSorting: false,
      meta: { width: '110px', cellClass: 'num text-ink-2' },
      cell: ({ row: { original: t } }) => (t.rangeLow !== null || t.rangeHigh !== null ? `${t.rangeLow ?? '−∞'} … ${t.rangeHigh ?? '∞'}` : '—'),
    },
    {
      id: 'signals',
      header: 'Process signal',
      accessorFn: (t) => t.signals.map((s) => s.signal).join(','),
      meta: { cellClass: 'truncate' },
      cell: ({ row: { original: t } }) =>
        t.signals.length === 0 ? (
          <span className="text-ink-3">—</span>
        ) : (
          t.signals.map((s) => (
            <span key={s.id} className="inline-flex items-center gap-1 mr-1">
              {s.signal} · {targetOf(s)}
              <Button kind="quiet" className="h-5 px-1" onClick={() => unmap(s.id)} aria-label={`Remove mapping ${s.signal} of ${s.targetCode ?? s.targetId} from ${t.name}`}>
                ×
              </Button>
            </span>
          ))
        ),
    },
  ];
}

/** Name, address or mapped signal contains the filter text. */
const matches = (t: TagConfigOut, needle: string) => {
  const n = needle.trim().toLowerCase();
  return !n || t.name.toLowerCase().includes(n) || t.address.toLowerCase().includes(n) || t.signals.some((s) => s.signal.includes(n));
};

/** The configured tags with address, scaling and mapped signals (sortable, filtered, virtualized); a mapping can be removed here. */
export function TagsTable({ plantId }: { plantId: number }) {
  const tags = useTagsConfig(plantId);
  const unmap = useDeleteMapping(plantId);
  const [filter, setFilter] = useState('');
  const columns = useMemo(() => tagColumns(unmap.mutate), [unmap.mutate]);
  const table = useDataTable({
    data: tags.data ?? [],
    columns,
    getRowId: (t) => String(t.id),
    state: { globalFilter: filter },
    onGlobalFilterChange: setFilter,
    globalFilterFn: (row, _id, needle: string) => matches(row.original, needle),
    initialState: { sorting: [{ id: 'name', desc: false }] },
  });
  const shown = table.getRowModel().rows.length;
  return (
    <Panel
      title="Tags"
      actions={<TextInput value={filter} onChange={(e) => setFilter(e.target.value)} placeholder="filter name, address, signal" aria-label="Filter tags" className="h-6 w-60" />}
    >
      <ErrorNote error={tags.error ?? unmap.error} />
      <DataTable
        table={table}
        label="Configured tags"
        empty={tags.isPending ? 'Loading…' : 'No tag matches the filter.'}
        virtual={{ rowHeight: ROW_H, maxHeight: '360px', scrollerLabel: 'Configured tag rows' }}
        rowProps={() => ({ 'data-testid': 'tag-config-row', className: 'border-b border-edge/50' })}
      />
      <p className="text-[11px] text-ink-3 mt-1">
        <span className="num">{shown}</span> of <span className="num">{tags.data?.length ?? 0}</span> tags. Live values and quality: Signals view.
      </p>
    </Panel>
  );
}
