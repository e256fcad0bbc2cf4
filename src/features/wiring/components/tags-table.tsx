import { useState } from 'react';
import { Button, ErrorNote, Panel, TextInput } from '../../../components/ui/controls.tsx';
import { prettyUnit } from '../../../lib/format.ts';
import { useDeleteMapping } from '../api/signal-map.ts';
import { useTagsConfig } from '../api/tags-config.ts';

const SHOWN = 200;
const th = 'text-left font-semibold text-ink-2 px-1.5 py-1 border-b border-edge sticky top-0 bg-panel';
const td = 'px-1.5 py-0.5 h-7 border-b border-edge/50';

/** The configured tags with address, scaling and mapped signals; a mapping can be removed here. */
export function TagsTable({ plantId }: { plantId: number }) {
  const tags = useTagsConfig(plantId);
  const unmap = useDeleteMapping(plantId);
  const [filter, setFilter] = useState('');
  const needle = filter.trim().toLowerCase();
  const rows = (tags.data ?? []).filter((t) => !needle || t.name.toLowerCase().includes(needle) || t.address.toLowerCase().includes(needle) || t.signals.some((s) => s.signal.includes(needle)));
  return (
    <Panel
      title="Tags"
      actions={<TextInput value={filter} onChange={(e) => setFilter(e.target.value)} placeholder="filter name, address, signal" aria-label="Filter tags" className="h-6 w-60" />}
    >
      <ErrorNote error={tags.error ?? unmap.error} />
      <div className="max-h-[360px] overflow-y-auto">
        <table className="w-full text-[12px]" aria-label="Configured tags">
          <thead>
            <tr>
              <th className={th}>Tag</th>
              <th className={th}>Source</th>
              <th className={th}>Address</th>
              <th className={th}>Unit</th>
              <th className={`${th} text-right`}>Gain · offset</th>
              <th className={`${th} text-right`}>Period [s]</th>
              <th className={th}>Range</th>
              <th className={th}>Process signal</th>
            </tr>
          </thead>
          <tbody>
            {rows.slice(0, SHOWN).map((t) => (
              <tr key={t.id} data-testid="tag-config-row">
                <td className={td}>
                  {t.name}
                  {!t.enabled ? <span className="text-ink-3"> (disabled)</span> : null}
                </td>
                <td className={`${td} text-ink-2`}>{t.source.name}</td>
                <td className={`${td} num break-all`}>{t.address}</td>
                <td className={`${td} text-ink-2`}>{prettyUnit(t.unit)}</td>
                <td className={`${td} num text-right`}>
                  {t.scaleGain} · {t.scaleOffset}
                </td>
                <td className={`${td} num text-right`}>{t.expectedPeriod_s}</td>
                <td className={`${td} num text-ink-2`}>{t.rangeLow !== null || t.rangeHigh !== null ? `${t.rangeLow ?? '−∞'} … ${t.rangeHigh ?? '∞'}` : '—'}</td>
                <td className={td}>
                  {t.signals.length === 0 ? <span className="text-ink-3">—</span> : null}
                  {t.signals.map((s) => (
                    <span key={s.id} className="inline-flex items-center gap-1 mr-1">
                      {s.signal} · {s.targetCode ?? `${s.targetType} ${s.targetId}`}
                      <Button kind="quiet" className="h-5 px-1" onClick={() => unmap.mutate(s.id)} aria-label={`Remove mapping ${s.signal} of ${s.targetCode ?? s.targetId} from ${t.name}`}>
                        ×
                      </Button>
                    </span>
                  ))}
                </td>
              </tr>
            ))}
          </tbody>
        </table>
      </div>
      <p className="text-[11px] text-ink-3 mt-1">
        <span className="num">{Math.min(rows.length, SHOWN)}</span> of <span className="num">{rows.length}</span> shown{rows.length > SHOWN ? ' — filter to narrow' : ''}. Live values and quality: Signals view.
      </p>
    </Panel>
  );
}
