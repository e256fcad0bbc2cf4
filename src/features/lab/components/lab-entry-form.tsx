import { useMemo, useState, type FormEvent } from 'react';
import { LAB_KINDS, LAB_UNITS, labResultInput, type LabKind, type LabResultInput } from '../../../../shared/contracts/lab.ts';
import { MAX_SETTLED_VOLUME_mLL, MIN_DILUTED_SETTLED_VOLUME_mLL, settleabilityIndex, settleabilityIssues } from '../../../../shared/domain/settleability.ts';
import { Button, ErrorNote, Field, fieldErrors, Panel, Select, TextInput } from '../../../components/ui/controls.tsx';
import { ApiError } from '../../../lib/api-client.ts';
import { formatValue } from '../../../lib/format.ts';
import { useEnterLabResult } from '../api/lab-results.ts';

type Values = Record<'sampledAt' | 'location' | 'settledVolume_mLL' | 'mlss_gL' | 'dilutionFactor' | 'tss_mgL' | 'note', string>;

const KIND_TEXT: Record<LabKind, string> = {
  SVI: 'SVI — settled volume, undiluted',
  DSVI: 'DSVI — diluted settled volume',
  SSVI: 'SSVI3.5 — stirred, at 3.5 g/L',
  MLSS: 'MLSS — lab suspended solids',
  TSS: 'TSS — e.g. effluent or RAS',
};

/** "Now" for a datetime-local input (local wall time, minutes). */
function localNow(): string {
  const d = new Date();
  d.setSeconds(0, 0);
  return new Date(d.getTime() - d.getTimezoneOffset() * 60_000).toISOString().slice(0, 16);
}

const isSettle = (k: LabKind) => k === 'SVI' || k === 'DSVI' || k === 'SSVI';

/**
 * Turns the form into the request body. Numbers that do not parse become field errors here; the
 * rest is checked by the server's own zod schema (shared/contracts/lab.ts), so the client refuses
 * exactly what the server would.
 */
function toBody(kind: LabKind, v: Values): { body?: LabResultInput; errors: Record<string, string[]> } {
  const errors: Record<string, string[]> = {};
  const num = (k: keyof Values) => {
    const s = v[k].trim().replace(',', '.');
    if (s === '') return undefined;
    const n = Number(s);
    if (!Number.isFinite(n)) (errors[k] ??= []).push('enter a number');
    return n;
  };
  const sampled = v.sampledAt ? new Date(v.sampledAt) : null;
  const raw: Record<string, unknown> = {
    kind,
    sampledAt: sampled && !Number.isNaN(sampled.getTime()) ? sampled.toISOString() : v.sampledAt,
    ...(v.location ? { location: v.location } : {}),
    ...(v.note.trim() ? { note: v.note.trim() } : {}),
  };
  if (isSettle(kind)) {
    raw.settledVolume_mLL = num('settledVolume_mLL');
    raw.mlss_gL = num('mlss_gL');
    if (kind === 'DSVI') raw.dilutionFactor = num('dilutionFactor');
  } else if (kind === 'MLSS') raw.mlss_gL = num('mlss_gL');
  else raw.tss_mgL = num('tss_mgL');
  if (Object.keys(errors).length) return { errors };
  const r = labResultInput.safeParse(raw);
  if (r.success) return { body: r.data, errors };
  for (const i of r.error.issues) {
    const k = i.path.length ? String(i.path[0]) : '_';
    (errors[k] ??= []).push(i.path.length && i.code === 'invalid_type' ? 'required' : i.message);
  }
  return { errors };
}

/** Entry form for one lab result, validated client-side with the server's schema; 422 field errors land beside their fields. */
export function LabEntryForm({ plantId, locations }: { plantId: number; locations: { code: string; name: string }[] }) {
  const [kind, setKind] = useState<LabKind>('SVI');
  const [v, setV] = useState<Values>({ sampledAt: localNow(), location: '', settledVolume_mLL: '', mlss_gL: '', dilutionFactor: '', tss_mgL: '', note: '' });
  const [clientErrors, setClientErrors] = useState<Record<string, string[]>>({});
  const enter = useEnterLabResult(plantId);
  const set = (k: keyof Values) => (e: { target: { value: string } }) => setV((o) => ({ ...o, [k]: e.target.value }));
  const fe = { ...fieldErrors(enter.error), ...clientErrors };

  // Live preview with the shared settleability rules: the index the server will compute, or why it will refuse.
  const preview = useMemo(() => {
    if (!isSettle(kind)) return null;
    const sv = Number(v.settledVolume_mLL);
    const m = Number(v.mlss_gL);
    const f = kind === 'DSVI' ? Number(v.dilutionFactor || '1') : undefined;
    if (!(sv > 0) || !(m > 0) || (f !== undefined && !(f >= 1))) return null;
    const inp = { kind, settledVolume_mLL: sv, mlss_gL: m, ...(f !== undefined ? { dilutionFactor: f } : {}) };
    const issues = settleabilityIssues(inp);
    if (issues.length) return { text: issues[0]!.message, bad: true };
    const r = settleabilityIndex(inp);
    return { text: `${kind} = ${formatValue(r.value!.svi_mLg, 3)} mL/g${r.quality !== 'good' ? ` (estimated: ${r.reasons.join('; ')})` : ''}`, bad: false };
  }, [kind, v.settledVolume_mLL, v.mlss_gL, v.dilutionFactor]);

  const submit = (e: FormEvent) => {
    e.preventDefault();
    const { body, errors } = toBody(kind, v);
    setClientErrors(errors);
    if (!body) {
      enter.reset();
      return;
    }
    enter.mutate(body, { onSuccess: () => setV((o) => ({ ...o, settledVolume_mLL: '', mlss_gL: '', dilutionFactor: '', tss_mgL: '', note: '' })) });
  };
  const general = enter.error instanceof ApiError && enter.error.fields && Object.keys(enter.error.fields).length ? null : enter.error;

  return (
    <Panel title="Enter a lab result">
      <form onSubmit={submit} aria-label="Lab result" noValidate className="flex flex-col gap-2">
        <div className="grid grid-cols-3 gap-x-3 gap-y-2">
          <Field label="Test" error={fe.kind}>
            <Select value={kind} onChange={(e) => setKind(e.target.value as LabKind)} name="kind">
              {LAB_KINDS.map((k) => (
                <option key={k} value={k}>
                  {KIND_TEXT[k]} [{LAB_UNITS[k]}]
                </option>
              ))}
            </Select>
          </Field>
          <Field label="Sampled at (local time)" error={fe.sampledAt}>
            <TextInput type="datetime-local" value={v.sampledAt} onChange={set('sampledAt')} aria-invalid={!!fe.sampledAt} />
          </Field>
          <Field label="Location" error={fe.location}>
            <Select value={v.location} onChange={set('location')} aria-invalid={!!fe.location}>
              <option value="">— plant (not given)</option>
              {locations.map((l) => (
                <option key={l.code} value={l.code}>
                  {l.code} · {l.name}
                </option>
              ))}
            </Select>
          </Field>
        </div>
        {isSettle(kind) ? (
          <div className="grid grid-cols-[200px_minmax(0,1fr)_200px_200px] gap-x-3 gap-y-2 items-start">
            <Field label={kind === 'DSVI' ? 'Settled volume, diluted' : 'Settled volume (30 min)'} unit="mL/L" error={fe.settledVolume_mLL}>
              <TextInput inputMode="decimal" className="num" value={v.settledVolume_mLL} onChange={set('settledVolume_mLL')} aria-invalid={!!fe.settledVolume_mLL} />
            </Field>
            <aside className="text-[11px] leading-[15px] text-ink-2 border-l-2 border-edge pl-2" data-testid="dilution-rule" aria-label="Dilution rule">
              <b>Dilution rule.</b> A settled volume above <span className="num">{MAX_SETTLED_VOLUME_mLL} mL/L</span> is not a valid SVI: dilute the sample with clarified effluent and repeat, then record a <b>DSVI</b> = diluted settled volume × dilution factor ÷ MLSS of the undiluted sample. The diluted reading must lie between{' '}
              <span className="num">{MIN_DILUTED_SETTLED_VOLUME_mLL}</span> and <span className="num">{MAX_SETTLED_VOLUME_mLL} mL/L</span>.
            </aside>
            <Field label={kind === 'SSVI' ? 'MLSS of the test (≈ 3.5)' : 'MLSS, undiluted sample'} unit="g/L" error={fe.mlss_gL}>
              <TextInput inputMode="decimal" className="num" value={v.mlss_gL} onChange={set('mlss_gL')} aria-invalid={!!fe.mlss_gL} />
            </Field>
            {kind === 'DSVI' ? (
              <Field label="Dilution factor (total ÷ sludge)" unit="–" error={fe.dilutionFactor}>
                <TextInput inputMode="decimal" className="num" value={v.dilutionFactor} onChange={set('dilutionFactor')} aria-invalid={!!fe.dilutionFactor} />
              </Field>
            ) : (
              <div />
            )}
          </div>
        ) : kind === 'MLSS' ? (
          <div className="grid grid-cols-3 gap-x-3">
            <Field label="MLSS" unit="g/L" error={fe.mlss_gL}>
              <TextInput inputMode="decimal" className="num" value={v.mlss_gL} onChange={set('mlss_gL')} aria-invalid={!!fe.mlss_gL} />
            </Field>
          </div>
        ) : (
          <div className="grid grid-cols-3 gap-x-3">
            <Field label="TSS" unit="mg/L" error={fe.tss_mgL}>
              <TextInput inputMode="decimal" className="num" value={v.tss_mgL} onChange={set('tss_mgL')} aria-invalid={!!fe.tss_mgL} />
            </Field>
          </div>
        )}
        <Field label="Note (who ran the test, remarks)" error={fe.note}>
          <TextInput value={v.note} onChange={set('note')} maxLength={500} />
        </Field>
        {fe._ ? <ErrorNote error={new Error(fe._.join('; '))} /> : null}
        <div className="flex items-center gap-3 h-7">
          <Button kind="primary" type="submit" disabled={enter.isPending}>
            Save result
          </Button>
          {preview && !(preview.bad && fe.settledVolume_mLL) ? (
            <span className={`text-[12px] num ${preview.bad ? 'text-alarm-2' : 'text-ink-2'}`} data-testid="lab-preview">
              {preview.bad ? '▲ ' : ''}
              {preview.text}
            </span>
          ) : null}
          {enter.isSuccess && !enter.isPending ? (
            <span className="text-[12px] text-ink-2" role="status" data-testid="lab-saved">
              Saved: {enter.data.kind} <span className="num">{formatValue(enter.data.value, 3)}</span> {enter.data.unit}
              {enter.data.flags.length ? ` — flagged: ${enter.data.flags.join('; ')}` : ''}
            </span>
          ) : null}
        </div>
        <ErrorNote error={general} />
      </form>
    </Panel>
  );
}
