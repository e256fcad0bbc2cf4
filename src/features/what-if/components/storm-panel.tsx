import { stormRequest, type StormResponse } from '../../../../shared/contracts/calc.ts';
import { Button, FormProblem, Panel } from '../../../components/ui/controls.tsx';
import { applyServerErrors } from '../../../lib/form.ts';
import { useStormCalc } from '../api/storm.ts';
import { EXAMPLE_INPUTS } from '../defaults.ts';
import { useCalcForm } from '../hooks/use-calc-form.ts';
import { Caution, fmt, NumField, QualityLine, Readouts, ResultHeader } from './calc-parts.tsx';
import { useLiveFill } from './live-fill.tsx';

const FIELDS: { key: keyof typeof EXAMPLE_INPUTS.storm; label: string; unit: string; hint?: string }[] = [
  { key: 'influentFlow_m3h', label: 'Influent flow now', unit: 'm³/h' },
  { key: 'stormFlow_m3h', label: 'Storm influent flow', unit: 'm³/h' },
  { key: 'rasFlow_m3h', label: 'RAS flow (held)', unit: 'm³/h' },
  { key: 'mlss_gL', label: 'MLSS', unit: 'g/L' },
  { key: 'svi_mLg', label: 'SVI', unit: 'mL/g' },
  { key: 'aerationVolume_m3', label: 'Aeration volume', unit: 'm³' },
  { key: 'clarifierArea_m2', label: 'Clarifier area, total', unit: 'm²' },
  { key: 'xrFactor', label: 'X_R,max factor', unit: 'mL/L', hint: 'X_R,max = factor / SVI' },
  { key: 'clarifierMass_kg', label: 'Sludge in clarifiers now', unit: 'kg', hint: 'optional' },
];

const RULES: Record<StormResponse['checks'][number]['rule'], { text: string; unit: string; digits: number; scale: number; op: string }> = {
  'min-mlss': { text: 'Basin MLSS during storage', unit: 'g/L', digits: 2, scale: 1, op: '≥' },
  'max-stored-fraction': { text: 'Inventory stored in clarifiers', unit: '%', digits: 1, scale: 100, op: '≤' },
  'max-blanket-rise': { text: 'Blanket rise', unit: 'm', digits: 2, scale: 1, op: '≤' },
};

/** Storm checks as a pass/fail list: a shape, a word and (for a failure only) colour. */
function StormChecks({ checks }: { checks: StormResponse['checks'] }) {
  if (!checks.length) return <p className="text-unavailable text-[12px]">■ Checks unavailable (see reasons).</p>;
  return (
    <ul className="text-[12px] mt-1" aria-label="Storm checks" data-testid="storm-checks">
      {checks.map((c) => {
        const r = RULES[c.rule];
        return (
          <li key={c.rule} className={`flex items-baseline gap-2 py-0.5 border-b border-edge/40 ${c.ok ? 'text-ink-2' : 'text-alarm-2 font-semibold'}`}>
            <span aria-hidden="true" className="w-4 text-center">
              {c.ok ? '✓' : '▲'}
            </span>
            <span className="w-9">{c.ok ? 'PASS' : 'FAIL'}</span>
            <span className="flex-1">{r.text}</span>
            <span className="num whitespace-nowrap">
              {fmt(c.value * r.scale, r.digits)} {r.unit} {c.ok ? r.op : 'not ' + r.op} {fmt(c.limit * r.scale, r.digits)} {r.unit}
            </span>
          </li>
        );
      })}
      <li className="text-[11px] text-ink-3 pt-0.5">Limits are rules of thumb of the trade (plant settings).</li>
    </ul>
  );
}

export function StormPanel() {
  const form = useCalcForm(stormRequest, EXAMPLE_INPUTS.storm);
  const calc = useStormCalc();
  const live = useLiveFill('storm', form.form);
  const submit = form.onSubmit(
    (body) => calc.mutate(body, { onError: (e) => applyServerErrors(e, form.form) }),
    () => calc.reset(),
  );
  const fe = form.error;
  const general = <FormProblem error={calc.error} root={form.form.formState.errors.root?.server?.message} />;
  const r = calc.data;
  return (
    <Panel title="Storm projection">
      <form onSubmit={submit} aria-label="Storm projection inputs" noValidate>
        <div className="grid grid-cols-3 gap-x-3 gap-y-1.5">
          {FIELDS.map((f) => (
            <NumField key={f.key} field={form.form.register(f.key)} label={f.label} unit={f.unit} hint={f.hint} error={fe(f.key)} />
          ))}
        </div>
        <div className="mt-2 flex items-center gap-2">
          <Button kind="primary" type="submit" disabled={calc.isPending}>
            Calculate storm
          </Button>
          {live.button}
          <span className="text-[11px] text-ink-3">Return flow held at its present value during the storm.</span>
        </div>
        {live.note}
      </form>
      {general}
      {r ? (
        <div data-testid="storm-result">
          <ResultHeader stale={form.stale} />
          <Readouts
            rows={[
              { label: 'Required X_R now', value: r.rasConcRequired_gL, unit: 'g/L' },
              { label: 'Required X_R at storm flow', value: r.stormRasConcRequired_gL, unit: 'g/L', abnormal: r.stormRasConcRequired_gL != null && r.rasConcMax_gL != null && r.stormRasConcRequired_gL > r.rasConcMax_gL ? 'above X_R,max' : undefined },
              { label: 'X_R,max (factor / SVI)', value: r.rasConcMax_gL, unit: 'g/L' },
              { label: 'Minimum return ratio R_min', value: r.minRecycleRatio, unit: '–', digits: 3 },
              { label: 'Minimum RAS flow at storm flow', value: r.minRasFlow_m3h, unit: 'm³/h', digits: 0 },
              { label: 'MLSS at storm equilibrium', value: r.equilibriumMlss_gL, unit: 'g/L' },
              { label: 'Sludge moved to clarifiers', value: r.sludgeToClarifiers_kg, unit: 'kg', digits: 0 },
              { label: 'Blanket volume of moved sludge', value: r.blanketVolume_m3, unit: 'm³', digits: 0 },
              { label: 'Blanket rise', value: r.blanketRise_m, unit: 'm' },
              { label: 'Inventory in clarifiers after', value: r.storedFraction == null ? null : r.storedFraction * 100, unit: '%', digits: 1 },
            ]}
          />
          <StormChecks checks={r.checks} />
          <QualityLine quality={r.quality} reasons={r.reasons} />
          <Caution />
        </div>
      ) : null}
    </Panel>
  );
}
