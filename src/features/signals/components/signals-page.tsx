import type { Row, SortingState } from '@tanstack/react-table';
import { memo, useDeferredValue, useMemo, useState } from 'react';
import { Link } from 'react-router';
import type { TagLive } from '../../../../shared/contracts/plant-api.ts';
import { qualityGrade } from '../../../../shared/contracts/sample-quality.ts';
import { ErrorNote, Select, TextInput } from '../../../components/ui/controls.tsx';
import { DataTable, useDataTable, type ColumnDef } from '../../../components/ui/data-table.tsx';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { formatAge, formatUtc, formatValue, prettyUnit } from '../../../lib/format.ts';
import type { StreamState } from '../../../lib/stream.ts';
import { useCurrentPlant } from '../../plant/api/plants.ts';
import { useTags } from '../api/tags.ts';
import { useLiveTag, useLiveTagStore, useSecondsClock, type LiveTagStore } from '../hooks/use-live-tags.ts';
import { PlantPicker } from './plant-picker.tsx';
import { QualityCell } from './quality-cell.tsx';

/** Same rule as the server (plant.service STALE_PERIODS): no value, or older than 3 expected periods. */
const STALE_PERIODS = 3;
const ROW_H = 26;

type QualityFilter = 'all' | 'good' | 'uncertain' | 'bad' | 'stale' | 'abnormal';
type KindFilter = 'all' | 'mqtt' | 'opcua';

/** A tag with the live values as they were when the filter or order was applied. */
interface SignalRowData {
  t: TagLive;
  value: number | null;
  quality: number | null;
  age: number | null;
  stale: boolean;
}

/** Tag with its live value merged in (the stream's value wins when newer than the fetched one). */
function merged(t: TagLive, store: LiveTagStore) {
  const live = store.get(t.id);
  const newer = live && (!t.ts || Date.parse(live.ts) >= Date.parse(t.ts));
  return newer ? { value: live.value, ts: live.ts, quality: live.quality } : { value: t.value, ts: t.ts, quality: t.quality?.code ?? null };
}

function severity(code: number | null, stale: boolean): number {
  const g = code === null ? 1 : { good: 0, uncertain: 2, bad: 3 }[qualityGrade(code)];
  return g + (stale ? 0.5 : 0);
}

function qualityMatches(r: SignalRowData, filter: QualityFilter): boolean {
  if (filter === 'all') return true;
  if (filter === 'stale') return r.stale;
  const g = r.quality === null ? null : qualityGrade(r.quality);
  if (filter === 'abnormal') return r.stale || g !== 'good';
  return g === filter;
}

// Sort keys as the operator reads the columns: names without case, no value last, quality by severity.
const COLUMNS: ColumnDef<SignalRowData>[] = [
  { id: 'name', header: 'Tag', accessorFn: (r) => r.t.name.toLowerCase(), sortingFn: 'basic', meta: { width: '15%' } },
  { id: 'description', header: 'Description', accessorFn: (r) => r.t.description.toLowerCase(), sortingFn: 'basic', meta: { width: '22%' } },
  { id: 'value', header: 'Value', accessorFn: (r) => r.value ?? Number.NEGATIVE_INFINITY, sortingFn: 'basic', meta: { width: '112px', align: 'right' } },
  { id: 'unit', header: 'Unit', accessorFn: (r) => r.t.unit, sortingFn: 'basic', meta: { width: '64px' } },
  {
    id: 'quality',
    header: 'Quality',
    accessorFn: (r) => severity(r.quality, r.stale),
    sortingFn: 'basic',
    filterFn: (row, _id, filter: QualityFilter) => qualityMatches(row.original, filter),
    meta: { width: '15%' },
  },
  { id: 'age', header: 'Age', accessorFn: (r) => r.age ?? Number.POSITIVE_INFINITY, sortingFn: 'basic', meta: { width: '64px', align: 'right' } },
  {
    id: 'source',
    header: 'Source',
    accessorFn: (r) => `${r.t.source.kind} ${r.t.source.name}`,
    sortingFn: 'basic',
    filterFn: (row, _id, kind: KindFilter) => kind === 'all' || row.original.t.source.kind === kind,
    meta: { width: '12%' },
  },
  { id: 'signals', header: 'Process signal', accessorFn: (r) => r.t.signals.map((s) => s.signal).join(','), sortingFn: 'basic', meta: { width: '14%' } },
];

const matchesText = (row: Row<SignalRowData>, _id: string, needle: string) => {
  const n = needle.trim().toLowerCase();
  return !n || row.original.t.name.toLowerCase().includes(n) || row.original.t.description.toLowerCase().includes(n);
};

export default function SignalsPage() {
  const { plantId, plants, setPlantId } = useCurrentPlant();
  return (
    <div className="flex flex-col gap-2">
      <div className="flex items-center gap-3">
        <h1 className="text-[15px] font-semibold">Signals</h1>
        <PlantPicker plants={plants} plantId={plantId} onChange={setPlantId} />
      </div>
      <SectionBoundary name="Signals table">{plantId === null ? <p className="text-ink-3">No plant to show.</p> : <SignalsTable plantId={plantId} />}</SectionBoundary>
    </div>
  );
}

function SignalsTable({ plantId }: { plantId: number }) {
  const tags = useTags(plantId);
  const { store, state } = useLiveTagStore(plantId);
  const [text, setText] = useState('');
  const [quality, setQuality] = useState<QualityFilter>('all');
  const [kind, setKind] = useState<KindFilter>('all');
  const [sorting, setSorting] = useState<SortingState>([{ id: 'name', desc: false }]);
  const deferredText = useDeferredValue(text);

  // Server clock minus client clock, so ages agree with the server's even when the clocks differ.
  const skewMs = tags.data ? Date.parse(tags.data.asOf) - tags.dataUpdatedAt : 0;

  // Filter and order are taken from the values at the moment they are applied (or the table is
  // refetched); live values then change in place without rows jumping under the operator's eyes.
  const data = useMemo(() => {
    const now = Date.now() + skewMs;
    return (tags.data?.tags ?? []).map((t): SignalRowData => {
      const m = merged(t, store);
      const age = m.ts ? (now - Date.parse(m.ts)) / 1000 : null;
      return { t, value: m.value, quality: m.quality, age, stale: age === null || age > STALE_PERIODS * t.expectedPeriod_s };
    });
    // store is read at filter time on purpose (see above); it is stable per plant. The filters and
    // the order are dependencies only so that a change takes a fresh snapshot of the live values.
  }, [tags.data, deferredText, quality, kind, sorting, store, skewMs]);

  const columnFilters = useMemo(
    () => [
      { id: 'quality', value: quality },
      { id: 'source', value: kind },
    ],
    [quality, kind],
  );
  const table = useDataTable({
    data,
    columns: COLUMNS,
    getRowId: (r) => String(r.t.id),
    state: { sorting, globalFilter: deferredText, columnFilters },
    onSortingChange: setSorting,
    globalFilterFn: matchesText,
  });
  const shown = table.getRowModel().rows.length;
  const total = tags.data?.tags.length ?? 0;

  return (
    <section aria-label="Signals" className="bg-panel border border-edge rounded-sm">
      <form className="flex flex-wrap items-center gap-2 px-2 py-1.5 border-b border-edge bg-panel-2" role="search" aria-label="Filter signals" onSubmit={(e) => e.preventDefault()}>
        <label className="flex items-center gap-1 text-[12px] text-ink-2">
          Find
          <TextInput type="search" value={text} onChange={(e) => setText(e.target.value)} placeholder="name or description" className="w-56" aria-label="Find in name or description" />
        </label>
        <label className="flex items-center gap-1 text-[12px] text-ink-2">
          Quality
          <Select value={quality} onChange={(e) => setQuality(e.target.value as QualityFilter)} aria-label="Quality">
            <option value="all">all</option>
            <option value="abnormal">abnormal</option>
            <option value="good">good</option>
            <option value="uncertain">uncertain</option>
            <option value="bad">bad</option>
            <option value="stale">stale</option>
          </Select>
        </label>
        <label className="flex items-center gap-1 text-[12px] text-ink-2">
          Source
          <Select value={kind} onChange={(e) => setKind(e.target.value as KindFilter)} aria-label="Source kind">
            <option value="all">all</option>
            <option value="mqtt">MQTT</option>
            <option value="opcua">OPC UA</option>
          </Select>
        </label>
        <span className="text-[12px] text-ink-2" data-testid="signals-count" role="status">
          <span className="num">{shown.toLocaleString('en-US')}</span> of <span className="num">{total.toLocaleString('en-US')}</span> tags
        </span>
        <StreamBadge state={state} />
      </form>
      <ErrorNote error={tags.error} />
      {tags.isPending ? <p className="p-2 text-ink-3">Loading tags…</p> : null}
      <DataTable
        table={table}
        label="Tags"
        empty={tags.isPending ? null : 'No tag matches the filter.'}
        virtual={{ rowHeight: ROW_H, height: 'max(320px, calc(100vh - 148px))', scrollerLabel: 'Tag rows (scroll with arrow keys or Page Up/Down)', scrollerTestId: 'signals-scroller' }}
        renderRow={(row, index) => <SignalRow key={row.id} tag={row.original.t} store={store} skewMs={skewMs} index={index} />}
      />
    </section>
  );
}

/** One tag's row; subscribes to that tag's live value only, so a new value re-renders one row. */
const SignalRow = memo(function SignalRow({ tag, store, skewMs, index }: { tag: TagLive; store: LiveTagStore; skewMs: number; index: number }) {
  const live = useLiveTag(store, tag.id);
  const now = useSecondsClock() + skewMs;
  const newer = live && (!tag.ts || Date.parse(live.ts) >= Date.parse(tag.ts));
  const value = newer ? live.value : tag.value;
  const ts = newer ? live.ts : tag.ts;
  const code = newer ? live.quality : (tag.quality?.code ?? null);
  const age = ts ? (now - Date.parse(ts)) / 1000 : null;
  const stale = age === null || age > STALE_PERIODS * tag.expectedPeriod_s;
  const bad = code !== null && qualityGrade(code) === 'bad';
  return (
    <tr aria-rowindex={index + 2} data-testid="signals-row" data-tag-id={tag.id} className={`border-b border-edge/40 ${index % 2 ? 'bg-panel' : 'bg-panel-2'}`} style={{ height: ROW_H }}>
      <td className="px-1.5 truncate">
        <Link to={`/trends?tags=${tag.id}`} className="hover:underline" title={`Trend ${tag.name}`}>
          {tag.name}
        </Link>
      </td>
      <td className="px-1.5 truncate text-ink-2" title={tag.description}>
        {tag.description}
      </td>
      <td className={`px-1.5 text-right num ${stale || bad ? 'text-ink-3' : 'text-ink'}`} data-testid="signal-value">
        <AlignedNumber text={tag.unit === 'state' && value !== null ? String(Math.round(value)) : formatValue(value, 4)} />
      </td>
      <td className="px-1.5 text-ink-3 truncate">{prettyUnit(tag.unit)}</td>
      <td className="px-1.5 overflow-hidden">
        <QualityCell code={code} stale={stale} />
      </td>
      <td className="px-1.5 text-right num text-ink-2" title={ts ? `source time ${formatUtc(ts)}` : 'no value yet'}>
        {formatAge(age)}
      </td>
      <td className="px-1.5 truncate text-ink-2" title={tag.source.name}>
        <span className="text-ink-3">{tag.source.kind === 'opcua' ? 'OPC UA' : 'MQTT'}</span> {tag.source.name}
      </td>
      <td className="px-1.5 truncate text-ink-2">
        {tag.signals.length ? tag.signals.map((s) => `${s.signal} · ${s.targetCode ?? `${s.targetType} ${s.targetId}`}`).join('; ') : <span className="text-ink-3">—</span>}
      </td>
    </tr>
  );
});

function StreamBadge({ state }: { state: StreamState }) {
  const text = state === 'live' ? 'live' : state === 'connecting' ? 'connecting…' : 'stream down';
  return (
    <span className={`ml-auto text-[11px] px-1 border rounded-[2px] ${state === 'down' ? 'border-alarm-1 text-alarm-1' : 'border-edge text-ink-3'}`} data-testid="stream-state">
      {text}
    </span>
  );
}

/** A number aligned on its decimal point: whole part right-aligned, fraction in a fixed-width box. */
function AlignedNumber({ text }: { text: string }) {
  const dot = text.indexOf('.');
  const whole = dot < 0 ? text : text.slice(0, dot);
  const frac = dot < 0 ? '' : text.slice(dot);
  return (
    <span className="inline-flex justify-end w-full">
      <span>{whole}</span>
      <span className="inline-block w-[5ch] text-left">{frac}</span>
    </span>
  );
}
