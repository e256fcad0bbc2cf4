import { settlerRequest } from '../../../../shared/contracts/calc.ts';
import { Button, FormProblem, Panel } from '../../../components/ui/controls.tsx';
import { applyServerErrors } from '../../../lib/form.ts';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { useSettlerCalc } from '../api/settler.ts';
import { EXAMPLE_INPUTS } from '../defaults.ts';
import { useCalcForm } from '../hooks/use-calc-form.ts';
import { NumField, QualityLine, Readouts, ResultHeader } from './calc-parts.tsx';
import { useLiveFill } from './live-fill.tsx';
import { SettlerProfile } from './settler-profile.tsx';

const FIELDS: { key: keyof typeof EXAMPLE_INPUTS.settler; label: string; unit: string }[] = [
  { key: 'feedFlow_m3h', label: 'Feed flow', unit: 'm³/h' },
  { key: 'feedTss_gL', label: 'Feed TSS', unit: 'g/L' },
  { key: 'underflowFlow_m3h', label: 'Underflow', unit: 'm³/h' },
  { key: 'area_m2', label: 'Area', unit: 'm²' },
  { key: 'depth_m', label: 'Depth', unit: 'm' },
  { key: 'layers', label: 'Layers', unit: 'count' },
  { key: 'feedLayer', label: 'Feed layer', unit: 'no.' },
];

/** BSM1 clarification threshold Xt (Alex et al. 2008), the blanket threshold the calculator reports at. */
const XT_gL = 3;

export function SettlerPanel() {
  const form = useCalcForm(settlerRequest, EXAMPLE_INPUTS.settler);
  const calc = useSettlerCalc();
  const live = useLiveFill('settler', form.form);
  const submit = form.onSubmit(
    (body) => calc.mutate(body, { onError: (e) => applyServerErrors(e, form.form) }),
    () => calc.reset(),
  );
  const fe = form.error;
  const general = <FormProblem error={calc.error} root={form.form.formState.errors.root?.server?.message} />;
  const r = calc.data;
  const sent = calc.variables;
  return (
    <Panel title="Layered settler">
      <form onSubmit={submit} aria-label="Layered settler inputs" noValidate>
        <div className="grid grid-cols-4 gap-x-3 gap-y-1.5">
          {FIELDS.map((f) => (
            <NumField key={f.key} field={form.form.register(f.key)} label={f.label} unit={f.unit} width="w-20" error={fe(f.key)} />
          ))}
        </div>
        <p className="text-[11px] text-ink-3 mt-1">Feed = Q + Q_R, underflow = Q_R + Q_W; area of all clarifiers in service; feed layer counted from the top. Takács double-exponential settling with the BSM1 parameters (Takács et al. 1991; Alex et al. 2008); steady state.</p>
        <div className="mt-1.5 flex items-center gap-2">
          <Button kind="primary" type="submit" disabled={calc.isPending}>
            {calc.isPending ? 'Solving…' : 'Calculate profile'}
          </Button>
          {live.button}
        </div>
        {live.note}
      </form>
      {general}
      {r && sent ? (
        <div data-testid="settler-result">
          <ResultHeader stale={form.stale} />
          <div className="flex flex-wrap gap-3 items-start">
            <SectionBoundary name="Settler profile">
              <SettlerProfile layers_gL={r.layers_gL} depth_m={sent.depth_m} feedLayer={sent.feedLayer ?? 5} blanketHeight_m={r.blanketHeight_m} threshold_gL={XT_gL} />
            </SectionBoundary>
            <div className="min-w-[220px] flex-1">
              <Readouts
                rows={[
                  { label: 'Effluent TSS (top layer)', value: r.effluentTss_gL, unit: 'g/L', digits: 3 },
                  { label: 'Underflow TSS (floor layer)', value: r.underflowTss_gL, unit: 'g/L' },
                  { label: `Blanket height at ${XT_gL} g/L`, value: r.blanketHeight_m, unit: 'm above floor' },
                ]}
              />
              <QualityLine quality={r.quality} reasons={r.reasons} />
            </div>
          </div>
        </div>
      ) : null}
    </Panel>
  );
}
