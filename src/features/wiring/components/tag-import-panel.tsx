import { useState } from 'react';
import { TAG_CSV_COLUMNS, TAG_CSV_REQUIRED, type TagImportOut } from '../../../../shared/contracts/wiring.ts';
import { Button, ErrorNote, Panel } from '../../../components/ui/controls.tsx';
import { serverFieldErrors } from '../../../lib/form.ts';
import { prettyUnit } from '../../../lib/format.ts';
import { useTagImport } from '../api/tag-import.ts';

const plural = (n: number, word: string) => `${n} ${word}${n === 1 ? '' : 's'}`;

/** Row errors keyed `line.<n>[.<column>]`, grouped by line number. */
function byLine(errors: Record<string, string[]>): Map<number, string[]> {
  const m = new Map<number, string[]>();
  for (const [k, msgs] of Object.entries(errors)) {
    const [, n, col] = /^line\.(\d+)(?:\.(.+))?$/.exec(k) ?? [];
    const line = n ? Number(n) : 0;
    m.set(line, [...(m.get(line) ?? []), ...msgs.map((x) => (col ? `${col}: ${x}` : x))]);
  }
  return m;
}

/**
 * A tag list from CSV: choose the file, see the preview with every row's problems (a dry run,
 * nothing stored), then import it — all or nothing, the same check again on the server.
 */
export function TagImportPanel({ plantId }: { plantId: number }) {
  const imp = useTagImport(plantId);
  const [csv, setCsv] = useState<{ name: string; text: string } | null>(null);
  const [preview, setPreview] = useState<TagImportOut | null>(null);
  const [stored, setStored] = useState<TagImportOut | null>(null);
  const check = (text: string) => imp.mutate({ csv: text, dryRun: true }, { onSuccess: (o) => setPreview(o) });
  const errors = byLine({ ...(preview?.errors ?? {}), ...serverFieldErrors(imp.error) });
  const general = errors.get(0);
  return (
    <Panel title="Import a tag list (CSV)">
      <p className="text-[12px] text-ink-2 mb-1">
        Header row with the columns <span className="num">{TAG_CSV_COLUMNS.join(', ')}</span> (required: <span className="num">{TAG_CSV_REQUIRED.join(', ')}</span>). source is the source name;
        signal and target map the tag (e.g. <span className="num">basin.mlss, ab1</span>).
      </p>
      <div className="flex flex-wrap items-center gap-2">
        <input
          type="file"
          accept=".csv,text/csv"
          aria-label="Tag list CSV file"
          className="text-[12px]"
          onChange={async (e) => {
            const file = e.target.files?.[0];
            setPreview(null);
            setStored(null);
            imp.reset();
            if (!file) return setCsv(null);
            const text = await file.text();
            setCsv({ name: file.name, text });
            check(text);
          }}
        />
        <Button onClick={() => csv && check(csv.text)} disabled={!csv || imp.isPending}>
          Check again
        </Button>
        <Button kind="primary" disabled={!csv || !preview?.ok || imp.isPending} onClick={() => csv && imp.mutate({ csv: csv.text, dryRun: false }, { onSuccess: (o) => (setStored(o), setPreview(null)) })}>
          Import {preview?.ok ? plural(preview.rows.length, 'tag') : ''}
        </Button>
        {preview ? (
          <span role="status" data-testid="import-summary" className={preview.ok ? 'text-ink-2' : 'text-alarm-1'}>
            {preview.ok
              ? `${csv?.name}: ${plural(preview.rows.length, 'row')}, all valid${preview.mappings ? `, ${plural(preview.mappings, 'mapping')}` : ''} — nothing stored yet`
              : `${csv?.name}: ${plural([...errors.keys()].filter((k) => k > 0).length, 'row')} with errors — nothing can be stored until they are fixed`}
          </span>
        ) : null}
        {stored ? (
          <span role="status" data-testid="import-summary" className="text-ink">
            Imported {plural(stored.imported, 'tag')}
            {stored.mappings ? ` and ${plural(stored.mappings, 'mapping')}` : ''}.
          </span>
        ) : null}
      </div>
      {general ? <p className="text-alarm-1 mt-1">{general.join('; ')}</p> : null}
      {imp.error && !Object.keys(serverFieldErrors(imp.error)).length ? <ErrorNote error={imp.error} /> : null}
      {preview && (preview.rows.length || errors.size) ? (
        <div className="max-h-[300px] overflow-y-auto mt-2 border border-edge">
          <table className="w-full text-[12px]" aria-label="Import preview">
            <thead className="sticky top-0 bg-panel">
              <tr>
                {['Line', 'Name', 'Source', 'Address', 'Unit', 'Gain · offset', 'Period [s]', 'Signal', 'Problems'].map((h) => (
                  <th key={h} className="text-left px-1.5 py-1 font-semibold text-ink-2 border-b border-edge">
                    {h}
                  </th>
                ))}
              </tr>
            </thead>
            <tbody>
              {[...new Set([...preview.rows.map((r) => r.line), ...[...errors.keys()].filter((k) => k > 0)])]
                .sort((a, b) => a - b)
                .map((line) => {
                  const r = preview.rows.find((x) => x.line === line);
                  const probs = errors.get(line);
                  return (
                    <tr key={line} data-testid="import-row" data-line={line} className={probs ? 'bg-white' : ''}>
                      <td className="px-1.5 py-0.5 num">{line}</td>
                      <td className="px-1.5 py-0.5">{r?.name ?? '—'}</td>
                      <td className="px-1.5 py-0.5 text-ink-2">{r?.source ?? '—'}</td>
                      <td className="px-1.5 py-0.5 num break-all">{r?.address ?? '—'}</td>
                      <td className="px-1.5 py-0.5 text-ink-2">{r ? prettyUnit(r.unit) : '—'}</td>
                      <td className="px-1.5 py-0.5 num">{r ? `${r.scaleGain} · ${r.scaleOffset}` : '—'}</td>
                      <td className="px-1.5 py-0.5 num">{r?.expectedPeriod_s ?? '—'}</td>
                      <td className="px-1.5 py-0.5">{r?.signal ? `${r.signal} · ${r.target ?? ''}` : '—'}</td>
                      <td className="px-1.5 py-0.5">
                        {probs ? (
                          <span className="text-alarm-1">
                            <span className="font-semibold">ERROR</span> {probs.join('; ')}
                          </span>
                        ) : (
                          <span className="text-ink-3">ok</span>
                        )}
                      </td>
                    </tr>
                  );
                })}
            </tbody>
          </table>
        </div>
      ) : null}
    </Panel>
  );
}
