import { useWatch } from 'react-hook-form';
import { statePointRequest } from '../../../../shared/contracts/calc.ts';
import { SETTLING_CORRELATIONS, CORRELATION_INDEX, type SettlingCorrelationId } from '../../../../shared/domain/settling.ts';
import { Button, Field, FormProblem, Panel, Select } from '../../../components/ui/controls.tsx';
import { applyServerErrors } from '../../../lib/form.ts';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { useStatePointCalc } from '../api/state-point.ts';
import { EXAMPLE_INPUTS } from '../defaults.ts';
import { useCalcForm, type FormValues } from '../hooks/use-calc-form.ts';
import { Caution, NumField, QualityLine, Readouts, ResultHeader } from './calc-parts.tsx';
import { useLiveFill } from './live-fill.tsx';
import { CORRELATION_LABEL, StatePointDiagram } from './state-point-diagram.tsx';

const GIVEN = 'given';

/** Only the chosen settling variant is sent: given v0 and k, or an index with its correlation. */
function sendChosenSettling(values: FormValues): (key: string) => boolean {
  const given = (values.settling as FormValues | undefined)?.correlation === GIVEN;
  return (k) => (given ? k !== 'settling.svi_mLg' && k !== 'settling.correlation' : k !== 'settling.v0_mh' && k !== 'settling.k_Lg');
}

export function StatePointPanel() {
  const form = useCalcForm(statePointRequest, EXAMPLE_INPUTS.statePoint, { textKeys: ['settling.correlation'], include: sendChosenSettling });
  const calc = useStatePointCalc();
  const submit = form.onSubmit(
    (body) => calc.mutate(body, { onError: (e) => applyServerErrors(e, form.form) }),
    () => calc.reset(),
  );
  const fe = form.error;
  const general = <FormProblem error={calc.error} root={form.form.formState.errors.root?.server?.message} />;
  const corr = useWatch({ control: form.form.control, name: 'settling.correlation' }) as SettlingCorrelationId | typeof GIVEN;
  const source = corr === GIVEN ? GIVEN : 'correlation';
  const indexName = corr !== GIVEN ? CORRELATION_INDEX[corr] : 'SVI';
  // The plant's settleability is an SVI or DSVI: it does not fill an SSVI3.5 field.
  const live = useLiveFill('statePoint', form.form, { keep: indexName === 'SSVI' ? ['settling.svi_mLg'] : [] });
  const num = (key: string, label: string, unit: string, hint?: string) => <NumField key={key} field={form.form.register(key)} label={label} unit={unit} hint={hint} error={fe(key)} />;
  const r = calc.data;
  const sent = calc.variables;
  const margin = (m: number | null | undefined) => (m != null && m < 0 ? 'negative: limit exceeded' : undefined);
  return (
    <Panel title="State point analysis">
      <form onSubmit={submit} aria-label="State point inputs" noValidate>
        <div className="grid grid-cols-4 gap-x-3 gap-y-1.5">
          {num('influentFlow_m3h', 'Influent flow Q', 'm³/h')}
          {num('rasFlow_m3h', 'RAS flow Q_R', 'm³/h')}
          {num('wasFlow_m3h', 'WAS flow Q_W', 'm³/h', 'optional, from underflow')}
          {num('mlss_gL', 'MLSS X', 'g/L')}
          {num('clarifierArea_m2', 'Clarifier area, total', 'm²')}
          <div className="col-span-2">
          <Field label="Settling parameters from" error={fe('settling.correlation') ?? fe('settling')}>
            <Select className="w-full" {...form.form.register('settling.correlation')}>
              {SETTLING_CORRELATIONS.map((c) => (
                <option key={c} value={c}>
                  {CORRELATION_LABEL[c]}
                </option>
              ))}
              <option value={GIVEN}>Vesilind v0 and k given</option>
            </Select>
          </Field>
          </div>
          {source === GIVEN ? (
            <>
              {num('settling.v0_mh', 'Vesilind v0', 'm/h')}
              {num('settling.k_Lg', 'Vesilind k', 'L/g')}
            </>
          ) : (
            num('settling.svi_mLg', indexName === 'SSVI' ? 'SSVI3.5' : 'SVI', 'mL/g')
          )}
        </div>
        <div className="mt-2 flex items-center gap-2">
          <Button kind="primary" type="submit" disabled={calc.isPending}>
            Calculate state point
          </Button>
          {live.button}
        </div>
        {live.note}
      </form>
      {general}
      {r ? (
        <div data-testid="state-point-result">
          <ResultHeader stale={form.stale} />
          <div className="flex flex-wrap gap-3 items-start">
            <div className="w-[300px] shrink-0">
              <Readouts
                rows={[
                  { label: 'Overflow rate SOR', value: r.overflowRate_mh, unit: 'm/h', digits: 3 },
                  { label: 'Underflow rate u', value: r.underflowRate_mh, unit: 'm/h', digits: 3 },
                  { label: 'Solids loading SLR', value: r.solidsLoading_kgm2h, unit: 'kg/(m²·h)' },
                  { label: 'Limiting flux G_L', value: r.limitingFlux_kgm2h, unit: 'kg/(m²·h)' },
                  { label: 'Limiting conc. X_L', value: r.limitingConc_gL, unit: 'g/L' },
                  { label: 'Max. underflow conc. G_L/u', value: r.maxUnderflowConc_gL, unit: 'g/L' },
                  { label: 'Required underflow conc.', value: r.requiredUnderflowConc_gL, unit: 'g/L' },
                  { label: 'Thickening margin', value: r.thickeningMargin == null ? null : r.thickeningMargin * 100, unit: '%', digits: 1, abnormal: margin(r.thickeningMargin) },
                  { label: 'Clarification margin', value: r.clarificationMargin == null ? null : r.clarificationMargin * 100, unit: '%', digits: 1, abnormal: margin(r.clarificationMargin) },
                  { label: 'Vesilind v0 used', value: r.settling.v0_mh, unit: 'm/h', digits: 3 },
                  { label: 'Vesilind k used', value: r.settling.k_Lg, unit: 'L/g', digits: 4 },
                ]}
              />
              <p className="text-[11px] text-ink-3">Settling from: {r.settling.source === GIVEN ? 'given v0 and k' : CORRELATION_LABEL[r.settling.source as SettlingCorrelationId] ?? r.settling.source}</p>
              <QualityLine quality={r.quality} reasons={r.reasons} />
              <Caution />
            </div>
            <SectionBoundary name="State point diagram">
              {sent && r.settling.v0_mh != null && r.settling.k_Lg != null && r.overflowRate_mh != null && r.underflowRate_mh != null && r.solidsLoading_kgm2h != null ? (
                <StatePointDiagram
                  v0_mh={r.settling.v0_mh}
                  k_Lg={r.settling.k_Lg}
                  mlss_gL={sent.mlss_gL}
                  overflowRate_mh={r.overflowRate_mh}
                  underflowRate_mh={r.underflowRate_mh}
                  solidsLoading_kgm2h={r.solidsLoading_kgm2h}
                  requiredUnderflowConc_gL={r.requiredUnderflowConc_gL}
                  limitingFlux_kgm2h={r.limitingFlux_kgm2h}
                  limitingConc_gL={r.limitingConc_gL}
                  abnormal={(r.thickeningMargin ?? 0) < 0 || (r.clarificationMargin ?? 0) < 0}
                />
              ) : (
                <p className="text-unavailable text-[12px]">■ Diagram unavailable: the settling parameters or flows could not be computed (see reasons).</p>
              )}
            </SectionBoundary>
          </div>
        </div>
      ) : null}
    </Panel>
  );
}
