import { useRef, useState } from 'react';
import type { HistoryJobOut, HistoryRowError } from '../../../../shared/contracts/history.ts';
import { Button, ErrorNote, Panel, TextInput } from '../../../components/ui/controls.tsx';
import { DataTable, useDataTable, type ColumnDef } from '../../../components/ui/data-table.tsx';
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

function summary(j: HistoryJobOut): string {
  if (j.state === 'queued') return 'waiting for the job worker…';
  if (j.state === 'running') return `${j.rows.toLocaleString()} lines read${j.rejected ? `, ${j.rejected.toLocaleString()} refused` : ''}…`;
  if (j.state === 'failed') return `${j.rejected.toLocaleString()} of ${j.rows.toLocaleString()} lines refused — nothing stored. ${j.message ?? ''}`;
  if (j.dryRun) return `${j.rows.toLocaleString()} lines checked, all valid (${j.from ?? '?'} – ${j.to ?? '?'}) — nothing stored yet`;
  return `${(j.inserted ?? 0).toLocaleString()} samples stored (${j.rows.toLocaleString()} lines; rows already stored are kept once)`;
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
      <div className="flex flex-wrap items-center gap-2">
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
        <TextInput aria-label="Timestamp format" placeholder="ISO 8601" value={tsFormat} onChange={(e) => setTsFormat(e.target.value)} className="w-[170px]" />
        <TextInput aria-label="Time zone" placeholder="UTC" value={timezone} onChange={(e) => setTimezone(e.target.value)} className="w-[140px]" />
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
      {sent !== null ? (
        <div className="mt-2 grid gap-1">
          <Bar label="Upload" value={sent} testId="history-upload-progress" />
          {j ? <Bar label={j.dryRun ? 'Check' : 'Import'} value={j.progress} testId="history-job-progress" /> : null}
          {recompute.data ? <Bar label="Balances recomputed" value={recompute.data.progress} testId="history-recompute-progress" /> : null}
        </div>
      ) : null}
      {j ? (
        <p role="status" data-testid="history-summary" className={`mt-1 text-[12px] ${j.state === 'failed' ? 'text-alarm-1' : 'text-ink'}`}>
          {summary(j)}
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
