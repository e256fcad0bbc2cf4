import { useEffect, useMemo, useRef, useState } from 'react';
import { useForm, useWatch } from 'react-hook-form';
import { useSearchParams } from 'react-router';
import { Button, ErrorNote, TextInput } from '../../../components/ui/controls.tsx';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { formatUtc, prettyUnit } from '../../../lib/format.ts';
import { useCurrentPlant } from '../../plant/api/plants.ts';
import { useTags } from '../../signals/api/tags.ts';
import { PlantPicker } from '../../signals/components/plant-picker.tsx';
import { usePenSamples } from '../api/samples.ts';
import { download, svgToPng, trendCsv } from '../export.ts';
import { useWidth } from '../hooks/use-width.ts';
import { MAX_PENS } from '../pens.ts';
import { TrendChart, type ChartPen } from './trend-chart.tsx';

const H = 3_600_000;
const PRESETS = [
  { key: '1h', label: '1 h', ms: H },
  { key: '8h', label: '8 h', ms: 8 * H },
  { key: '24h', label: '24 h', ms: 24 * H },
  { key: '7d', label: '7 d', ms: 7 * 24 * H },
  { key: '30d', label: '30 d', ms: 30 * 24 * H },
  { key: '1y', label: '1 y', ms: 365 * 24 * H },
] as const;
/** Narrowest window a zoom goes to [ms]: below a minute raw samples are as fine as it gets. */
const MIN_SPAN = 60_000;

/**
 * The window: a preset follows "now" (advancing on a timer), a zoom or pan fixes from/to.
 * Both live in the URL, so a view can be bookmarked or sent to a colleague.
 */
function useTrendWindow() {
  const [sp, setSp] = useSearchParams();
  const preset = PRESETS.find((p) => p.key === (sp.get('range') ?? (sp.get('from') ? '' : '1h')));
  const fixedFrom = Date.parse(sp.get('from') ?? '');
  const fixedTo = Date.parse(sp.get('to') ?? '');
  const tickMs = preset ? Math.min(300_000, Math.max(10_000, preset.ms / 240)) : 0;
  const [now, setNow] = useState(() => Date.now());
  useEffect(() => {
    setNow(Date.now());
    if (!tickMs) return;
    const t = setInterval(() => setNow(Date.now()), tickMs);
    return () => clearInterval(t);
  }, [tickMs]);
  // Live windows are aligned to the tick so every pen asks the same, cache-friendly window.
  const liveTo = tickMs ? Math.ceil(now / tickMs) * tickMs : now;
  const [fromMs, toMs] = preset || !Number.isFinite(fixedFrom) || !Number.isFinite(fixedTo) || fixedFrom >= fixedTo ? [liveTo - (preset?.ms ?? H), liveTo] : [fixedFrom, fixedTo];
  const tagIds = (sp.get('tags') ?? '')
    .split(',')
    .map(Number)
    .filter((n) => Number.isInteger(n) && n > 0);
  const update = (f: (q: URLSearchParams) => void) =>
    setSp((prev) => {
      const q = new URLSearchParams(prev);
      f(q);
      return q;
    });
  return {
    fromMs,
    toMs,
    nowMs: now,
    presetKey: preset?.key ?? null,
    tagIds,
    setPreset: (key: string) =>
      update((q) => {
        q.set('range', key);
        q.delete('from');
        q.delete('to');
      }),
    setWindow: (a: number, b: number) =>
      update((q) => {
        const mid = (a + b) / 2;
        const half = Math.max(MIN_SPAN, b - a) / 2;
        q.delete('range');
        q.set('from', new Date(Math.round(mid - half)).toISOString());
        q.set('to', new Date(Math.round(mid + half)).toISOString());
      }),
    setTags: (ids: number[]) => update((q) => (ids.length ? q.set('tags', ids.join(',')) : q.delete('tags'))),
  };
}

/**
 * The last view of each plant (pens and window: the page's query string) is kept in this
 * browser. Opening Trends with no pens in the URL brings it back; a URL with pens (a bookmark,
 * a link from Signals) wins. Switching plant shows that plant's own last view, since tag ids
 * belong to one plant.
 */
function useRememberedView(plantId: number) {
  const [sp, setSp] = useSearchParams();
  const key = `flocstream.trends.${plantId}`;
  const shown = useRef<number | null>(null);
  useEffect(() => {
    if (shown.current === plantId) return;
    const first = shown.current === null;
    shown.current = plantId;
    if (first && sp.has('tags')) return;
    const saved = localStorage.getItem(key);
    if (!first || saved !== null) setSp(new URLSearchParams(saved ?? ''), { replace: true });
    // Only a change of plant restores (not a change of the URL, which is saved below).
  }, [plantId, key, sp, setSp]);
  useEffect(() => {
    if (shown.current === plantId) localStorage.setItem(key, sp.toString());
  }, [sp, key, plantId]);
}

export default function TrendsPage() {
  const { plantId, plants, setPlantId } = useCurrentPlant();
  return (
    <div className="flex flex-col gap-2">
      <div className="flex items-center gap-3">
        <h1 className="text-[15px] font-semibold">Trends</h1>
        <PlantPicker plants={plants} plantId={plantId} onChange={setPlantId} />
      </div>
      <SectionBoundary name="Trend">{plantId === null ? <p className="text-ink-3">No plant to show.</p> : <TrendView plantId={plantId} />}</SectionBoundary>
    </div>
  );
}

function TrendView({ plantId }: { plantId: number }) {
  useRememberedView(plantId);
  const w = useTrendWindow();
  const tags = useTags(plantId);
  const byId = useMemo(() => new Map((tags.data?.tags ?? []).map((t) => [t.id, t])), [tags.data]);
  const from = new Date(w.fromMs).toISOString();
  const to = new Date(w.toMs).toISOString();
  const samples = usePenSamples(plantId, w.tagIds, from, to);
  const [boxRef, width] = useWidth<HTMLDivElement>();
  const svgRef = useRef<SVGSVGElement>(null);
  const [exportError, setExportError] = useState<unknown>(null);

  const pens: ChartPen[] = w.tagIds.map((id, i) => {
    const t = byId.get(id);
    const q = samples[i];
    return { tagId: id, name: t?.name ?? `tag ${id}`, unit: q?.data?.unit ?? t?.unit ?? '', expectedPeriod_s: t?.expectedPeriod_s, data: q?.data, pending: q?.isFetching ?? false };
  });
  const firstError = samples.find((s) => s.error)?.error;
  const span = w.toMs - w.fromMs;

  const exportCsv = () => {
    const ready = pens.filter((p) => p.data).map((p) => ({ name: p.name, data: p.data! }));
    download(`flocstream-trend-${from.slice(0, 16).replace(/:/g, '')}Z.csv`, new Blob([trendCsv(ready, w.fromMs, w.toMs)], { type: 'text/csv' }));
  };
  const exportPng = async () => {
    setExportError(null);
    try {
      if (svgRef.current) download(`flocstream-trend-${from.slice(0, 16).replace(/:/g, '')}Z.png`, await svgToPng(svgRef.current));
    } catch (e) {
      setExportError(e);
    }
  };

  return (
    <section aria-label="Trend" className="bg-panel border border-edge rounded-sm">
      <div className="flex flex-wrap items-center gap-x-3 gap-y-1.5 px-2 py-1.5 border-b border-edge bg-panel-2">
        <PenAdder ready={!!tags.data} tags={tags.data?.tags ?? []} onAdd={(id) => !w.tagIds.includes(id) && w.setTags([...w.tagIds, id].slice(0, MAX_PENS))} full={w.tagIds.length >= MAX_PENS} />
        <div role="group" aria-label="Time range" className="flex gap-0.5">
          {PRESETS.map((p) => (
            <Button key={p.key} kind={w.presetKey === p.key ? 'primary' : 'normal'} aria-pressed={w.presetKey === p.key} onClick={() => w.setPreset(p.key)} className="px-2 num">
              {p.label}
            </Button>
          ))}
        </div>
        <div role="group" aria-label="Zoom and pan" className="flex gap-0.5">
          <Button onClick={() => w.setWindow(w.fromMs - span / 2, w.toMs - span / 2)} aria-label="Pan earlier" title="Pan earlier by half the window">
            ◀
          </Button>
          <Button onClick={() => w.setWindow(w.fromMs + span / 4, w.toMs - span / 4)} aria-label="Zoom in" title="Zoom in (half the window)">
            +
          </Button>
          <Button onClick={() => w.setWindow(w.fromMs - span / 2, w.toMs + span / 2)} aria-label="Zoom out" title="Zoom out (twice the window)">
            −
          </Button>
          <Button onClick={() => w.setWindow(w.fromMs + span / 2, w.toMs + span / 2)} aria-label="Pan later" title="Pan later by half the window">
            ▶
          </Button>
        </div>
        <span className="num text-[12px] text-ink-2" data-testid="trend-window">
          {formatUtc(from).slice(0, 16)}Z → {formatUtc(to).slice(0, 16)}Z
        </span>
      </div>
      <div className="flex flex-wrap items-center gap-1 px-2 pt-1.5">
        <ul aria-label="Pens" className="flex flex-wrap gap-1">
          {pens.map((p) => (
            <li key={p.tagId} className="flex items-center gap-1 border border-edge bg-panel-2 rounded-sm pl-1.5 text-[12px]">
              <span>{p.name}</span>
              <span className="text-ink-3">[{prettyUnit(p.unit)}]</span>
              <button type="button" className="px-1.5 h-6 text-ink-2 hover:text-ink" aria-label={`Remove pen ${p.name}`} onClick={() => w.setTags(w.tagIds.filter((x) => x !== p.tagId))}>
                ×
              </button>
            </li>
          ))}
        </ul>
        <div className="ml-auto flex gap-1">
          <Button onClick={exportCsv} disabled={!pens.some((p) => p.data)}>
            Export CSV
          </Button>
          <Button onClick={() => void exportPng()} disabled={!pens.length}>
            Export PNG
          </Button>
        </div>
      </div>
      <div className="p-2">
        <ErrorNote error={firstError ?? tags.error ?? exportError} />
        <div ref={boxRef} className="w-full">
          {pens.length === 0 ? (
            <p className="text-ink-3 py-6 text-center">Add a pen: type a tag name above (or open one from the Signals table).</p>
          ) : width > 0 ? (
            <TrendChart ref={svgRef} pens={pens} fromMs={w.fromMs} toMs={w.toMs} nowMs={w.nowMs} width={width} onZoom={w.setWindow} />
          ) : null}
        </div>
        {pens.length ? (
          <p className="text-[11px] text-ink-3 mt-1">
            Drag across the plot to zoom. Hatched: no data (the line is not drawn across). Amber dashes and rings: uncertain; red cross: bad; the ticks along the foot of a lane mark the same points when
            they are too dense to mark one by one. Grey band: min–max of each bucket.
          </p>
        ) : null}
      </div>
    </section>
  );
}

/** A tag name typed as it is, or the one tag whose name starts with it; otherwise why not. */
function findTag(tags: { id: number; name: string }[], typed: string): { id: number } | { miss: string } {
  const needle = typed.trim().toLowerCase();
  const exact = tags.find((t) => t.name.toLowerCase() === needle);
  const starts = tags.filter((t) => t.name.toLowerCase().startsWith(needle));
  const hit = exact ?? (starts.length === 1 ? starts[0] : undefined);
  if (hit) return { id: hit.id };
  return { miss: starts.length > 1 ? `${starts.length} tags start with “${typed.trim()}”; pick one` : `no tag named “${typed.trim()}”` };
}

function PenAdder({ tags, onAdd, full, ready }: { tags: { id: number; name: string; description: string }[]; onAdd(id: number): void; full: boolean; ready: boolean }) {
  const form = useForm<{ text: string }>({ defaultValues: { text: '' } });
  const text = useWatch({ control: form.control, name: 'text' });
  const miss = form.formState.errors.text?.message ?? null;
  // The tag list is the rule here (no request is sent), so the lookup is the field's validation.
  const submit = form.handleSubmit((v) => {
    const r = findTag(tags, v.text);
    if ('miss' in r) return form.setError('text', { type: 'validate', message: r.miss });
    form.reset({ text: '' });
    onAdd(r.id);
  });
  return (
    <form onSubmit={(e) => void submit(e)} className="flex items-center gap-1" aria-label="Add pen">
      <label className="flex items-center gap-1 text-[12px] text-ink-2">
        Pen
        <TextInput list="trend-tag-names" {...form.register('text')} placeholder={ready ? 'tag name' : 'loading tags…'} disabled={!ready} className="w-40" aria-label="Tag to add as a pen" aria-invalid={miss ? true : undefined} />
      </label>
      <datalist id="trend-tag-names">
        {tags.map((t) => (
          <option key={t.id} value={t.name}>
            {t.description}
          </option>
        ))}
      </datalist>
      <Button type="submit" disabled={full || !text.trim()}>
        Add pen
      </Button>
      {miss ? (
        <span role="alert" className="text-[12px] text-alarm-1">
          {miss}
        </span>
      ) : null}
    </form>
  );
}
