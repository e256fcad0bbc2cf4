import { useMemo } from 'react';
import { roleAtLeast } from '../../../../shared/contracts/roles.ts';
import { ErrorNote, Panel } from '../../../components/ui/controls.tsx';
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

function RecentResults({ plantId }: { plantId: number }) {
  const q = useLabResults(plantId);
  const rows = q.data?.results ?? [];
  return (
    <Panel title="Recent results (newest sample first)">
      <ErrorNote error={q.error} />
      {q.isPending ? <p className="text-ink-3">Loading…</p> : null}
      {!q.isPending && !rows.length ? <p className="text-ink-3 text-[12px]">No lab result yet.</p> : null}
      {rows.length ? (
        <table className="w-full text-[12px] border-collapse" data-testid="lab-results">
          <thead>
            <tr className="text-left text-ink-3 border-b border-edge h-6">
              <th className="w-[150px] font-normal">Sampled (UTC)</th>
              <th className="w-[60px] font-normal">Test</th>
              <th className="w-[130px] font-normal text-right pr-4">Result</th>
              <th className="w-[90px] font-normal">Location</th>
              <th className="w-[320px] font-normal">Readings</th>
              <th className="font-normal">Flags · note</th>
            </tr>
          </thead>
          <tbody>
            {rows.map((r) => {
              const d = r.details as { settledVolume_mLL?: number; mlss_gL?: number; dilutionFactor?: number; note?: string };
              const readings = [
                d.settledVolume_mLL !== undefined ? `settled ${formatValue(d.settledVolume_mLL, 3)} mL/L` : null,
                d.dilutionFactor !== undefined ? `dilution × ${formatValue(d.dilutionFactor, 3)}` : null,
                d.mlss_gL !== undefined && r.kind !== 'MLSS' ? `MLSS ${formatValue(d.mlss_gL, 3)} g/L` : null,
              ].filter(Boolean);
              return (
                <tr key={r.id} className="border-b border-edge/60 h-6" data-kind={r.kind}>
                  <td className="num">{formatUtc(r.sampledAt)}</td>
                  <td>{r.kind}</td>
                  <td className="num text-right pr-4">
                    {formatValue(r.value, 3)} <span className="text-ink-3 text-[11px]">{r.unit}</span>
                  </td>
                  <td className="num">{r.location ?? '—'}</td>
                  <td className="num text-ink-2">{readings.join(' · ') || '—'}</td>
                  <td>
                    {r.flags.length ? <span className="px-1 border border-estimated text-estimated text-[10px] mr-1">FLAG</span> : null}
                    {[...r.flags, d.note].filter(Boolean).join(' · ')}
                  </td>
                </tr>
              );
            })}
          </tbody>
        </table>
      ) : null}
    </Panel>
  );
}
