import { useVirtualizer } from '@tanstack/react-virtual';
import { memo, useDeferredValue, useMemo, useRef, useState } from 'react';
import { Link } from 'react-router';
import type { TagLive } from '../../../../shared/contracts/plant-api.ts';
import { qualityGrade } from '../../../../shared/contracts/sample-quality.ts';
import { ErrorNote, Select, TextInput } from '../../../components/ui/controls.tsx';
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
const COLS = 'minmax(170px,1.1fr) minmax(180px,1.6fr) 112px 64px minmax(170px,1.2fr) 64px minmax(130px,0.9fr) minmax(130px,0.9fr)';

type SortKey = 'name' | 'description' | 'value' | 'unit' | 'quality' | 'age' | 'source' | 'signals';
type QualityFilter = 'all' | 'good' | 'uncertain' | 'bad' | 'stale' | 'abnormal';
type KindFilter = 'all' | 'mqtt' | 'opcua';

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
  const [sort, setSort] = useState<{ key: SortKey; dir: 1 | -1 }>({ key: 'name', dir: 1 });
  const deferredText = useDeferredValue(text);

  // Server clock minus client clock, so ages agree with the server's even when the clocks differ.
  const skewMs = tags.data ? Date.parse(tags.data.asOf) - tags.dataUpdatedAt : 0;

  // Filter and order are taken from the values at the moment they are applied (or the table is
  // refetched); live values then change in place without rows jumping under the operator's eyes.
  const rows = useMemo(() => {
    const all = tags.data?.tags ?? [];
    const needle = deferredText.trim().toLowerCase();
    const now = Date.now() + skewMs;
    const withLive = all.map((t) => {
      const m = merged(t, store);
      const age = m.ts ? (now - Date.parse(m.ts)) / 1000 : null;
      return { t, m, age, stale: age === null || age > STALE_PERIODS * t.expectedPeriod_s };
    });
    const kept = withLive.filter(({ t, m, stale }) => {
      if (kind !== 'all' && t.source.kind !== kind) return false;
      if (needle && !t.name.toLowerCase().includes(needle) && !t.description.toLowerCase().includes(needle)) return false;
      if (quality === 'all') return true;
      if (quality === 'stale') return stale;
      const g = m.quality === null ? null : qualityGrade(m.quality);
      if (quality === 'abnormal') return stale || g !== 'good';
      return g === quality;
    });
    const key = sort.key;
    const val = (r: (typeof kept)[number]): string | number => {
      switch (key) {
        case 'name':
          return r.t.name.toLowerCase();
        case 'description':
          return r.t.description.toLowerCase();
        case 'value':
          return r.m.value ?? Number.NEGATIVE_INFINITY;
        case 'unit':
          return r.t.unit;
        case 'quality':
          return severity(r.m.quality, r.stale);
        case 'age':
          return r.age ?? Number.POSITIVE_INFINITY;
        case 'source':
          return `${r.t.source.kind} ${r.t.source.name}`;
        case 'signals':
          return r.t.signals.map((s) => s.signal).join(',');
      }
    };
    return kept
      .map((r) => ({ r, k: val(r) }))
      .sort((a, b) => (a.k < b.k ? -sort.dir : a.k > b.k ? sort.dir : a.r.t.id - b.r.t.id))
      .map((x) => x.r.t);
    // store is read at filter time on purpose (see above); it is stable per plant.
  }, [tags.data, deferredText, quality, kind, sort, store, skewMs]);

  const scroller = useRef<HTMLDivElement>(null);
  const virt = useVirtualizer({ count: rows.length, getScrollElement: () => scroller.current, estimateSize: () => ROW_H, overscan: 10 });
  const total = tags.data?.tags.length ?? 0;

  const header = (key: SortKey, label: string, align: 'left' | 'right' = 'left') => {
    const active = sort.key === key;
    return (
      <div role="columnheader" aria-sort={active ? (sort.dir === 1 ? 'ascending' : 'descending') : 'none'} className={`px-1.5 flex items-center ${align === 'right' ? 'justify-end' : ''}`}>
        <button
          type="button"
          className="h-6 text-[12px] font-semibold text-ink-2 hover:text-ink"
          onClick={() => setSort((s) => ({ key, dir: s.key === key ? ((-s.dir) as 1 | -1) : 1 }))}
        >
          {label}
          <span aria-hidden className="inline-block w-3 text-ink-3">
            {active ? (sort.dir === 1 ? '▲' : '▼') : ''}
          </span>
        </button>
      </div>
    );
  };

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
          <span className="num">{rows.length.toLocaleString('en-US')}</span> of <span className="num">{total.toLocaleString('en-US')}</span> tags
        </span>
        <StreamBadge state={state} />
      </form>
      <ErrorNote error={tags.error} />
      <div role="table" aria-label="Tags" aria-rowcount={rows.length + 1} className="text-[12px]">
        <div role="rowgroup" className="border-b border-edge bg-panel-2 overflow-y-hidden [scrollbar-gutter:stable]">
          <div role="row" aria-rowindex={1} className="grid" style={{ gridTemplateColumns: COLS }}>
            {header('name', 'Tag')}
            {header('description', 'Description')}
            {header('value', 'Value', 'right')}
            {header('unit', 'Unit')}
            {header('quality', 'Quality')}
            {header('age', 'Age', 'right')}
            {header('source', 'Source')}
            {header('signals', 'Process signal')}
          </div>
        </div>
        <div
          ref={scroller}
          role="rowgroup"
          tabIndex={0}
          aria-label="Tag rows (scroll with arrow keys or Page Up/Down)"
          data-testid="signals-scroller"
          className="overflow-y-auto [scrollbar-gutter:stable] bg-panel-2"
          style={{ height: 'max(320px, calc(100vh - 148px))' }}
        >
          {tags.isPending ? <p className="p-2 text-ink-3">Loading tags…</p> : null}
          {!tags.isPending && rows.length === 0 ? <p className="p-2 text-ink-3">No tag matches the filter.</p> : null}
          <div style={{ height: virt.getTotalSize(), position: 'relative' }}>
            {virt.getVirtualItems().map((vi) => (
              <SignalRow key={rows[vi.index]!.id} tag={rows[vi.index]!} store={store} skewMs={skewMs} top={vi.start} index={vi.index} />
            ))}
          </div>
        </div>
      </div>
    </section>
  );
}

const SignalRow = memo(function SignalRow({ tag, store, skewMs, top, index }: { tag: TagLive; store: LiveTagStore; skewMs: number; top: number; index: number }) {
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
    <div
      role="row"
      aria-rowindex={index + 2}
      data-testid="signals-row"
      data-tag-id={tag.id}
      className={`grid absolute left-0 right-0 items-center border-b border-edge/40 ${index % 2 ? 'bg-panel' : 'bg-panel-2'}`}
      style={{ gridTemplateColumns: COLS, height: ROW_H, transform: `translateY(${top}px)` }}
    >
      <div role="cell" className="px-1.5 truncate">
        <Link to={`/trends?tags=${tag.id}`} className="hover:underline" title={`Trend ${tag.name}`}>
          {tag.name}
        </Link>
      </div>
      <div role="cell" className="px-1.5 truncate text-ink-2" title={tag.description}>
        {tag.description}
      </div>
      <div role="cell" className={`px-1.5 text-right num ${stale || bad ? 'text-ink-3' : 'text-ink'}`} data-testid="signal-value">
        <AlignedNumber text={tag.unit === 'state' && value !== null ? String(Math.round(value)) : formatValue(value, 4)} />
      </div>
      <div role="cell" className="px-1.5 text-ink-3 truncate">
        {prettyUnit(tag.unit)}
      </div>
      <div role="cell" className="px-1.5 min-w-0 overflow-hidden">
        <QualityCell code={code} stale={stale} />
      </div>
      <div role="cell" className="px-1.5 text-right num text-ink-2" title={ts ? `source time ${formatUtc(ts)}` : 'no value yet'}>
        {formatAge(age)}
      </div>
      <div role="cell" className="px-1.5 truncate text-ink-2" title={tag.source.name}>
        <span className="text-ink-3">{tag.source.kind === 'opcua' ? 'OPC UA' : 'MQTT'}</span> {tag.source.name}
      </div>
      <div role="cell" className="px-1.5 truncate text-ink-2">
        {tag.signals.length ? tag.signals.map((s) => `${s.signal} · ${s.targetCode ?? `${s.targetType} ${s.targetId}`}`).join('; ') : <span className="text-ink-3">—</span>}
      </div>
    </div>
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
