import { srtRequest } from '../../../../shared/contracts/calc.ts';
import { Button, FormProblem, Panel } from '../../../components/ui/controls.tsx';
import { applyServerErrors } from '../../../lib/form.ts';
import { useSrtCalc } from '../api/srt.ts';
import { EXAMPLE_INPUTS } from '../defaults.ts';
import { useCalcForm } from '../hooks/use-calc-form.ts';
import { Caution, NumField, QualityLine, Readouts, ResultHeader } from './calc-parts.tsx';
import { useLiveFill } from './live-fill.tsx';

const FIELDS: { key: keyof typeof EXAMPLE_INPUTS.srt; label: string; unit: string; hint?: string }[] = [
  { key: 'aerationMass_kg', label: 'Aeration mass', unit: 'kg' },
  { key: 'clarifierMass_kg', label: 'Clarifier mass', unit: 'kg' },
  { key: 'wasFlow_m3h', label: 'WAS flow', unit: 'm³/h' },
  { key: 'wasTss_gL', label: 'WAS TSS', unit: 'g/L' },
  { key: 'effluentFlow_m3h', label: 'Effluent flow', unit: 'm³/h' },
  { key: 'effluentTss_gL', label: 'Effluent TSS', unit: 'g/L' },
  { key: 'targetSrt_d', label: 'Target SRT', unit: 'd', hint: 'optional' },
];

export function SrtPanel() {
  const form = useCalcForm(srtRequest, EXAMPLE_INPUTS.srt);
  const calc = useSrtCalc();
  const live = useLiveFill('srt', form.form);
  const submit = form.onSubmit(
    (body) => calc.mutate(body, { onError: (e) => applyServerErrors(e, form.form) }),
    () => calc.reset(),
  );
  const fe = form.error;
  const general = <FormProblem error={calc.error} root={form.form.formState.errors.root?.server?.message} />;
  const r = calc.data;
  return (
    <Panel title="Sludge age (SRT)">
      <form onSubmit={submit} aria-label="Sludge age inputs" noValidate>
        <div className="grid grid-cols-3 gap-x-3 gap-y-1.5">
          {FIELDS.map((f) => (
            <NumField key={f.key} field={form.form.register(f.key)} label={f.label} unit={f.unit} hint={f.hint} width="w-24" error={fe(f.key)} />
          ))}
        </div>
        <div className="mt-2 flex items-center gap-2">
          <Button kind="primary" type="submit" disabled={calc.isPending}>
            Calculate SRT
          </Button>
          {live.button}
        </div>
        {live.note}
      </form>
      {general}
      {r ? (
        <div data-testid="srt-result">
          <ResultHeader stale={form.stale} />
          <Readouts
            rows={[
              { label: 'Total SRT', value: r.srtTotal_d, unit: 'd' },
              { label: 'Aeration-only SRT', value: r.srtAeration_d, unit: 'd' },
              ...(r.wasFlowForTarget_m3h !== undefined ? [{ label: 'WAS flow for the target SRT', value: r.wasFlowForTarget_m3h, unit: 'm³/h', digits: 1 }] : []),
            ]}
          />
          <QualityLine quality={r.quality} reasons={r.reasons} />
          <Caution />
        </div>
      ) : null}
    </Panel>
  );
}
