import { sviRequest } from '../../../../shared/contracts/calc.ts';
import { Button, Field, FormProblem, Panel, Select } from '../../../components/ui/controls.tsx';
import { applyServerErrors } from '../../../lib/form.ts';
import { useSviCalc } from '../api/svi.ts';
import { EXAMPLE_INPUTS } from '../defaults.ts';
import { useCalcForm } from '../hooks/use-calc-form.ts';
import { NumField, QualityLine, Readouts, ResultHeader } from './calc-parts.tsx';

export function SviPanel() {
  const form = useCalcForm(sviRequest, EXAMPLE_INPUTS.svi, { textKeys: ['kind'] });
  const calc = useSviCalc();
  const submit = form.onSubmit(
    (body) => calc.mutate(body, { onError: (e) => applyServerErrors(e, form.form) }),
    () => calc.reset(),
  );
  const fe = form.error;
  const general = <FormProblem error={calc.error} root={form.form.formState.errors.root?.server?.message} />;
  const r = calc.data;
  const num = (key: keyof typeof EXAMPLE_INPUTS.svi, label: string, unit: string, hint?: string) => (
    <NumField field={form.form.register(key)} label={label} unit={unit} hint={hint} width="w-20" error={fe(key)} />
  );
  return (
    <Panel title="Settleability index">
      <form onSubmit={submit} aria-label="Settleability inputs" noValidate>
        <div className="grid grid-cols-2 gap-x-3 gap-y-1.5">
          {num('settledVolume_mLL', 'Settled volume', 'mL/L', 'after 30 min; of the diluted sample for a DSVI')}
          {num('mlss_gL', 'MLSS (undiluted)', 'g/L')}
          {num('dilutionFactor', 'Dilution factor', '–', 'blank or 1: undiluted')}
          <Field label="Test kind" error={fe('kind')}>
            <Select className="w-full" {...form.form.register('kind')}>
              <option value="">infer from dilution</option>
              <option value="SVI">SVI</option>
              <option value="DSVI">DSVI</option>
              <option value="SSVI">SSVI3.5 (stirred)</option>
            </Select>
          </Field>
        </div>
        <div className="mt-2">
          <Button kind="primary" type="submit" disabled={calc.isPending}>
            Calculate index
          </Button>
        </div>
      </form>
      {general}
      {r ? (
        <div data-testid="svi-result">
          <ResultHeader stale={form.stale} />
          <Readouts rows={[{ label: `${r.kind}`, value: r.svi_mLg, unit: 'mL/g', digits: 0 }]} />
          <QualityLine quality={r.quality} reasons={r.reasons} />
        </div>
      ) : null}
    </Panel>
  );
}
