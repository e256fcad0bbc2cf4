import { useMemo } from 'react';
import { useForm, useWatch } from 'react-hook-form';
import { LAB_KINDS, LAB_UNITS, labResultInput, type LabKind, type LabResultInput } from '../../../../shared/contracts/lab.ts';
import { MAX_SETTLED_VOLUME_mLL, MIN_DILUTED_SETTLED_VOLUME_mLL, settleabilityIndex, settleabilityIssues } from '../../../../shared/domain/settleability.ts';
import { Button, Field, FormProblem, Panel, Select, TextInput } from '../../../components/ui/controls.tsx';
import { applyServerErrors, contractResolver, fieldError, numberOrText, textOrNothing } from '../../../lib/form.ts';
import { formatValue } from '../../../lib/format.ts';
import { useEnterLabResult } from '../api/lab-results.ts';

type Values = Record<'kind' | 'sampledAt' | 'location' | 'settledVolume_mLL' | 'mlss_gL' | 'dilutionFactor' | 'tss_mgL' | 'note', string>;

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

const isSettle = (k: string) => k === 'SVI' || k === 'DSVI' || k === 'SSVI';

/**
 * The request body from the typed form: only the readings the chosen test has, local time as
 * ISO 8601 UTC. The server's own schema (shared/contracts/lab.ts) then checks it, so the client
 * refuses exactly what the server would.
 */
function toBody(v: Values): Record<string, unknown> {
  const sampled = v.sampledAt ? new Date(v.sampledAt) : null;
  const body: Record<string, unknown> = {
    kind: v.kind,
    sampledAt: sampled && !Number.isNaN(sampled.getTime()) ? sampled.toISOString() : textOrNothing(v.sampledAt),
    location: textOrNothing(v.location),
    note: textOrNothing(v.note),
  };
  if (isSettle(v.kind)) {
    body.settledVolume_mLL = numberOrText(v.settledVolume_mLL);
    body.mlss_gL = numberOrText(v.mlss_gL);
    if (v.kind === 'DSVI') body.dilutionFactor = numberOrText(v.dilutionFactor);
  } else if (v.kind === 'MLSS') body.mlss_gL = numberOrText(v.mlss_gL);
  else body.tss_mgL = numberOrText(v.tss_mgL);
  // Blank optional fields are left out, not sent as undefined keys of a strict object.
  return Object.fromEntries(Object.entries(body).filter(([, x]) => x !== undefined));
}

const resolver = contractResolver(labResultInput, toBody);

/** Entry form for one lab result (react-hook-form), validated client-side with the server's schema; 422 field errors land beside their fields. */
export function LabEntryForm({ plantId, locations }: { plantId: number; locations: { code: string; name: string }[] }) {
  const form = useForm<Values, unknown, LabResultInput>({
    defaultValues: { kind: 'SVI', sampledAt: localNow(), location: '', settledVolume_mLL: '', mlss_gL: '', dilutionFactor: '', tss_mgL: '', note: '' },
    resolver,
  });
  const { register, formState } = form;
  const enter = useEnterLabResult(plantId);
  const fe = (name: keyof Values) => fieldError(formState.errors, name);
  const [kind, settledVolume, mlss, dilution] = useWatch({ control: form.control, name: ['kind', 'settledVolume_mLL', 'mlss_gL', 'dilutionFactor'] }) as [LabKind, string, string, string];

  // Live preview with the shared settleability rules: the index the server will compute, or why it will refuse.
  const preview = useMemo(() => {
    if (!isSettle(kind)) return null;
    const sv = Number(settledVolume);
    const m = Number(mlss);
    const f = kind === 'DSVI' ? Number(dilution || '1') : undefined;
    if (!(sv > 0) || !(m > 0) || (f !== undefined && !(f >= 1))) return null;
    const inp = { kind: kind as 'SVI' | 'DSVI' | 'SSVI', settledVolume_mLL: sv, mlss_gL: m, ...(f !== undefined ? { dilutionFactor: f } : {}) };
    const issues = settleabilityIssues(inp);
    if (issues.length) return { text: issues[0]!.message, bad: true };
    const r = settleabilityIndex(inp);
    return { text: `${kind} = ${formatValue(r.value!.svi_mLg, 3)} mL/g${r.quality !== 'good' ? ` (estimated: ${r.reasons.join('; ')})` : ''}`, bad: false };
  }, [kind, settledVolume, mlss, dilution]);

  const submit = form.handleSubmit(
    (body) =>
      enter.mutate(body, {
        onSuccess: () => form.reset({ ...form.getValues(), settledVolume_mLL: '', mlss_gL: '', dilutionFactor: '', tss_mgL: '', note: '' }),
        onError: (e) => applyServerErrors(e, form),
      }),
    () => enter.reset(),
  );
  const num = (name: keyof Values) => ({ ...register(name), inputMode: 'decimal' as const, className: 'num', 'aria-invalid': !!fe(name) });

  return (
    <Panel title="Enter a lab result">
      <form onSubmit={(e) => void submit(e)} aria-label="Lab result" noValidate className="flex flex-col gap-2">
        <div className="grid grid-cols-3 gap-x-3 gap-y-2">
          <Field label="Test" error={fe('kind')}>
            <Select {...register('kind')}>
              {LAB_KINDS.map((k) => (
                <option key={k} value={k}>
                  {KIND_TEXT[k]} [{LAB_UNITS[k]}]
                </option>
              ))}
            </Select>
          </Field>
          <Field label="Sampled at (local time)" error={fe('sampledAt')}>
            <TextInput type="datetime-local" {...register('sampledAt')} aria-invalid={!!fe('sampledAt')} />
          </Field>
          <Field label="Location" error={fe('location')}>
            <Select {...register('location')} aria-invalid={!!fe('location')}>
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
            <Field label={kind === 'DSVI' ? 'Settled volume, diluted' : 'Settled volume (30 min)'} unit="mL/L" error={fe('settledVolume_mLL')}>
              <TextInput {...num('settledVolume_mLL')} />
            </Field>
            <aside className="text-[11px] leading-[15px] text-ink-2 border-l-2 border-edge pl-2" data-testid="dilution-rule" aria-label="Dilution rule">
              <b>Dilution rule.</b> A settled volume above <span className="num">{MAX_SETTLED_VOLUME_mLL} mL/L</span> is not a valid SVI: dilute the sample with clarified effluent and repeat, then record a <b>DSVI</b> = diluted settled volume × dilution factor ÷ MLSS of the undiluted sample. The diluted reading must lie between{' '}
              <span className="num">{MIN_DILUTED_SETTLED_VOLUME_mLL}</span> and <span className="num">{MAX_SETTLED_VOLUME_mLL} mL/L</span>.
            </aside>
            <Field label={kind === 'SSVI' ? 'MLSS of the test (≈ 3.5)' : 'MLSS, undiluted sample'} unit="g/L" error={fe('mlss_gL')}>
              <TextInput {...num('mlss_gL')} />
            </Field>
            {kind === 'DSVI' ? (
              <Field label="Dilution factor (total ÷ sludge)" unit="–" error={fe('dilutionFactor')}>
                <TextInput {...num('dilutionFactor')} />
              </Field>
            ) : (
              <div />
            )}
          </div>
        ) : kind === 'MLSS' ? (
          <div className="grid grid-cols-3 gap-x-3">
            <Field label="MLSS" unit="g/L" error={fe('mlss_gL')}>
              <TextInput {...num('mlss_gL')} />
            </Field>
          </div>
        ) : (
          <div className="grid grid-cols-3 gap-x-3">
            <Field label="TSS" unit="mg/L" error={fe('tss_mgL')}>
              <TextInput {...num('tss_mgL')} />
            </Field>
          </div>
        )}
        <Field label="Note (who ran the test, remarks)" error={fe('note')}>
          <TextInput {...register('note')} maxLength={500} />
        </Field>
        <div className="flex items-center gap-3 h-7">
          <Button kind="primary" type="submit" disabled={enter.isPending}>
            Save result
          </Button>
          {preview && !(preview.bad && fe('settledVolume_mLL')) ? (
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
        <FormProblem error={enter.error} root={formState.errors.root?.server?.message} />
      </form>
    </Panel>
  );
}
