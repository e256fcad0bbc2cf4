import { useRef, useState } from 'react';
import { LAB_CSV_COLUMNS, LAB_CSV_MAX_ROWS } from '../../../../shared/contracts/lab.ts';
import { Button, ErrorNote, Panel } from '../../../components/ui/controls.tsx';
import { ApiError } from '../../../lib/api-client.ts';
import { useImportLabCsv } from '../api/lab-import.ts';

/** "line.3.mlss_gL" → { line: 3, field: "mlss_gL" }, in file order. */
function rowErrors(fields: Record<string, string[]>) {
  return Object.entries(fields)
    .map(([k, msgs]) => {
      const m = /^line\.(\d+)(?:\.(.+))?$/.exec(k);
      return { line: m ? Number(m[1]) : null, field: m ? (m[2] ?? null) : k === '_' ? null : k, msgs };
    })
    .sort((a, b) => (a.line ?? 0) - (b.line ?? 0));
}

/** CSV upload of lab results; the server's policy is all or nothing, and every bad row is listed by line and field. */
export function LabCsvUpload({ plantId }: { plantId: number }) {
  const imp = useImportLabCsv(plantId);
  const [file, setFile] = useState<File | null>(null);
  const input = useRef<HTMLInputElement>(null);
  const errs = imp.error instanceof ApiError && imp.error.fields ? rowErrors(imp.error.fields) : [];
  const upload = async () => {
    if (!file) return;
    imp.mutate(await file.text(), {
      onSuccess: () => {
        setFile(null);
        if (input.current) input.current.value = '';
      },
    });
  };
  return (
    <Panel title="Upload lab results (CSV)">
      <p className="text-[12px] text-ink-2">
        <b>All or nothing:</b> if any row is invalid, nothing is stored and every bad row is listed below by its line (the header is line 1). Fix the file and upload it again.
      </p>
      <p className="text-[11px] text-ink-3 mt-1">
        RFC 4180 CSV with a header row; columns (any order, empty cell = not given): <span className="num">{LAB_CSV_COLUMNS.join(', ')}</span>. At most <span className="num">{LAB_CSV_MAX_ROWS}</span> rows and 1 MiB. Units as in the form: mL/L, g/L, mg/L.
      </p>
      <div className="flex items-center gap-2 mt-2">
        <label className="text-[12px] text-ink-2 flex items-center gap-2">
          CSV file
          <input ref={input} type="file" accept=".csv,text/csv" onChange={(e) => setFile(e.target.files?.[0] ?? null)} className="text-[12px]" />
        </label>
        <Button kind="primary" onClick={() => void upload()} disabled={!file || imp.isPending}>
          Upload
        </Button>
      </div>
      {imp.isSuccess ? (
        <p role="status" className="mt-2 text-[12px]" data-testid="import-ok">
          Stored <span className="num">{imp.data.imported}</span> results.
        </p>
      ) : null}
      {errs.length ? (
        <div className="mt-2" data-testid="import-errors">
          <p role="alert" className="text-[12px] text-alarm-1 font-semibold">
            Nothing was stored: {(imp.error as ApiError).message}
          </p>
          <table className="w-full text-[12px] mt-1">
            <thead>
              <tr className="text-left text-ink-3 border-b border-edge">
                <th className="w-[56px] font-normal">Line</th>
                <th className="w-[150px] font-normal">Field</th>
                <th className="font-normal">Problem</th>
              </tr>
            </thead>
            <tbody>
              {errs.map((e) => (
                <tr key={`${e.line}-${e.field}`} className="border-b border-edge/60 align-top">
                  <td className="num">{e.line ?? '—'}</td>
                  <td className="num">{e.field ?? 'whole row'}</td>
                  <td>{e.msgs.join('; ')}</td>
                </tr>
              ))}
            </tbody>
          </table>
        </div>
      ) : (
        <ErrorNote error={imp.error} />
      )}
    </Panel>
  );
}
