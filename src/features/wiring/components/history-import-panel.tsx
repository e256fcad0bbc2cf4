import { useRef, useState } from 'react';
import type { HistoryJobOut, HistoryRowError } from '../../../../shared/contracts/history.ts';
import { Button, ErrorNote, Field, Panel, TextInput } from '../../../components/ui/controls.tsx';
import { DataTable, useDataTable, type ColumnDef } from '../../../components/ui/data-table.tsx';
import { formatUtc } from '../../../lib/format.ts';
import { uploadHistory, useHistoryJob } from '../api/history-import.ts';

const errorColumns: ColumnDef<HistoryRowError>[] = [
  { id: 'line', header: 'Line', accessorKey: 'line', meta: { width: '80px', align: 'right', cellClass: 'num' } },
  { id: 'field', header: 'Field', accessorKey: 'field', meta: { width: '22%', cellClass: 'num truncate' } },
  { id: 'message', header: 'Problem', accessorKey: 'message', meta: { cellClass: 'text-alarm-1' } },
];

function Bar({ label, value, testId }: { label: string; value: number; testId: string }) {
  const pct = Math.round(Math.max(0, Math.min(1, value)) * 100);
  return (
    <div className="flex items-center gap-2 text-[12px]">
      <span className="w-[140px] text-ink-2">{label}</span>
      <div role="progressbar" aria-label={label} aria-valuenow={pct} aria-valuemin={0} aria-valuemax={100} data-testid={testId} className="h-2 flex-1 max-w-[360px] border border-edge bg-white">
        <div className="h-full bg-ink-2" style={{ width: `${pct}%` }} />
      </div>
      <span className="num w-[44px] text-right">{pct} %</span>
    </div>
  );
}

function ErrorList({ errors }: { errors: HistoryRowError[] }) {
  const table = useDataTable({ data: errors, columns: errorColumns });
  return <DataTable table={table} label="Lines to fix" testId="history-errors" virtual={{ rowHeight: 24, maxHeight: '300px', scrollerLabel: 'Lines to fix' }} />;
}

function span(j: HistoryJobOut): string {
  return j.from && j.to ? `${formatUtc(j.from)} to ${formatUtc(j.to)}` : '';
}

/** One sentence for where the job stands, in the plant user's terms: lines of the file, samples stored. */
function summary(j: HistoryJobOut): string {
  const n = (x: number) => x.toLocaleString('en-US');
  if (j.state === 'queued') return 'Waiting for the job worker…';
  if (j.state === 'running') return `${n(j.rows)} lines read${j.rejected ? `, ${n(j.rejected)} refused` : ''}…`;
  if (j.state === 'failed') {
    // With a list of lines the server's message only repeats the count; without one it is the reason.
    if (j.errors.length) return `${n(j.rejected)} of ${n(j.rows)} lines refused. Nothing was stored: fix the lines below and check the file again.`;
    return `Nothing was stored: ${j.message ?? 'the job failed'}.`;
  }
  if (j.dryRun) return `${n(j.rows)} lines checked, all valid (${span(j)}). Nothing is stored until you press Import.`;
  const inserted = j.inserted ?? 0;
  const kept = j.rows > 0 && inserted < j.rows ? ` ${n(j.rows - inserted)} were already stored and were left as they were.` : '';
  return `${n(inserted)} samples stored, ${span(j)}.${kept}`;
}

function recomputeSummary(r: HistoryJobOut): string {
  if (r.state === 'done') return `Balances recomputed for the window (${r.rows.toLocaleString('en-US')} balances); trends and the balance history now cover it.`;
  if (r.state === 'failed') return `Recomputing the balances failed: ${r.message ?? 'unknown reason'}. The samples are stored.`;
  return 'Recomputing the balances for the window…';
}

/**
 * A historian's past from CSV: pick the file, check it (a dry run on the server, nothing
 * stored), then import it — all or nothing. Progress of the upload and of the job; a failed
 * check lists the lines to fix. After an import the balances of the window are recomputed.
 */
export function HistoryImportPanel({ plantId }: { plantId: number }) {
  const [file, setFile] = useState<File | null>(null);
  const [tsFormat, setTsFormat] = useState('');
  const [timezone, setTimezone] = useState('');
  const [sent, setSent] = useState<number | null>(null);
  const [jobId, setJobId] = useState<number | null>(null);
  const [error, setError] = useState<unknown>(null);
  const abort = useRef<(() => void) | null>(null);
  const job = useHistoryJob(jobId);
  const j = job.data;
  const recompute = useHistoryJob(j && !j.dryRun && j.recomputeJobId ? j.recomputeJobId : null);
  const busy = (sent !== null && sent < 1 && jobId === null) || (j !== undefined && (j.state === 'queued' || j.state === 'running'));
  const checkedOk = j?.dryRun === true && j.state === 'done';

  const send = (dryRun: boolean) => {
    if (!file) return;
    setError(null);
    setJobId(null);
    setSent(0);
    const up = uploadHistory(plantId, file, { dryRun, tsFormat, timezone }, setSent);
    abort.current = up.abort;
    up.done.then(
      (r) => (setSent(1), setJobId(r.jobId)),
      (e: unknown) => (setSent(null), setError(e)),
    );
  };

  return (
    <Panel title="Import history from a historian (CSV)">
      <p className="text-[12px] text-ink-2 mb-1">
        Long layout <span className="num">tag,ts,value[,quality]</span> or wide <span className="num">ts,&lt;tag&gt;,&lt;tag&gt;,…</span>; a unit in brackets (
        <span className="num">FIT-101 [gpm]</span>) is converted to the tag&apos;s unit. Timestamps ISO 8601, or give a format (
        <span className="num">DD.MM.YYYY HH:mm:ss</span>) and time zone. A file with any bad line stores nothing.
      </p>
      <div className="flex flex-wrap items-end gap-2">
        <input
          type="file"
          accept=".csv,text/csv"
          aria-label="History CSV file"
          className="text-[12px]"
          onChange={(e) => {
            setFile(e.target.files?.[0] ?? null);
            setJobId(null);
            setSent(null);
            setError(null);
          }}
        />
        <Field label="Timestamp format">
          <TextInput placeholder="ISO 8601" value={tsFormat} onChange={(e) => setTsFormat(e.target.value)} className="w-[170px]" />
        </Field>
        <Field label="Time zone">
          <TextInput placeholder="UTC" value={timezone} onChange={(e) => setTimezone(e.target.value)} className="w-[140px]" />
        </Field>
        <Button onClick={() => send(true)} disabled={!file || busy}>
          Check
        </Button>
        <Button kind="primary" onClick={() => send(false)} disabled={!file || busy || !checkedOk}>
          Import
        </Button>
        {busy && sent !== null && sent < 1 ? (
          <Button kind="quiet" onClick={() => abort.current?.()}>
            Cancel upload
          </Button>
        ) : null}
      </div>
      {file && !busy && !checkedOk && !(j && !j.dryRun) ? (
        <p className="mt-1 text-[12px] text-ink-3" data-testid="history-next-step">
          Check the file first: Import is enabled once the check finds no bad line.
        </p>
      ) : null}
      {sent !== null ? (
        <div className="mt-2 grid gap-1">
          <Bar label="Upload" value={sent} testId="history-upload-progress" />
          {/* A failed job read the file to its end too (it lists every bad line): its bar ends full, the summary says the outcome. */}
          {j ? <Bar label={j.dryRun ? 'Check' : 'Import'} value={j.state === 'done' || j.state === 'failed' ? 1 : j.progress} testId="history-job-progress" /> : null}
          {recompute.data ? <Bar label="Balances recomputed" value={recompute.data.progress} testId="history-recompute-progress" /> : null}
        </div>
      ) : null}
      {j ? (
        <p role="status" data-testid="history-summary" className={`mt-1 text-[12px] ${j.state === 'failed' ? 'text-alarm-1' : 'text-ink'}`}>
          {summary(j)}
        </p>
      ) : null}
      {recompute.data ? (
        <p role="status" data-testid="history-recompute-summary" className={`text-[12px] ${recompute.data.state === 'failed' ? 'text-alarm-1' : 'text-ink'}`}>
          {recomputeSummary(recompute.data)}
        </p>
      ) : null}
      {error ? <ErrorNote error={error} /> : null}
      {job.error ? <ErrorNote error={job.error} /> : null}
      {j && j.errors.length ? (
        <div className="mt-2">
          <p className="text-[12px] text-ink-2 mb-1">
            {j.rejected > j.errors.length ? `First ${j.errors.length} of ${j.rejected.toLocaleString()} refused lines:` : 'Lines to fix:'}
          </p>
          <ErrorList errors={j.errors} />
        </div>
      ) : null}
    </Panel>
  );
}
