import type { UseFormReturn } from 'react-hook-form';
import { Button } from '../../../components/ui/controls.tsx';
import { useCurrentPlant } from '../../plant/api/plants.ts';
import { useLivePrefill, type PrefillForm } from '../api/live-prefill.ts';
import type { FormValues } from '../hooks/use-calc-form.ts';

/**
 * "Fill from live plant" for one calculator: its button, and the line saying which balance the
 * values came from and which fields were left as they were (or why nothing could be filled).
 * `keep`: fields the form must not take from the plant as it stands (listed as left).
 */
export function useLiveFill(kind: PrefillForm, form: UseFormReturn<FormValues, unknown, unknown>, opts: { keep?: readonly string[] } = {}) {
  const { plantId } = useCurrentPlant();
  const prefill = useLivePrefill(kind);
  const keep = opts.keep ?? [];
  const fill = () => {
    if (plantId === null) return;
    prefill.mutate(plantId, { onSuccess: (p) => Object.entries(p.values).forEach(([k, v]) => !keep.includes(k) && form.setValue(k, v, { shouldDirty: true })) });
  };
  const button = (
    <Button onClick={fill} disabled={plantId === null || prefill.isPending}>
      Fill from live plant
    </Button>
  );
  const p = prefill.data;
  const left = p ? [...p.missing, ...Object.keys(p.values).filter((k) => keep.includes(k))] : [];
  const note = prefill.error ? (
    <p role="alert" className="mt-1 text-[12px] text-alarm-1">
      Could not fill from the plant: {prefill.error.message}
    </p>
  ) : p ? (
    <p role="status" className="mt-1 text-[11px] text-ink-3" data-testid={`${kind}-prefill`}>
      Filled from the balance of {p.balanceTs.slice(0, 19).replace('T', ' ')}Z{p.estimated ? ' (balance partly estimated)' : ''}
      {left.length ? `; not available or not comparable, left as they were: ${left.join(', ')}` : ''}.
    </p>
  ) : null;
  return { button, note };
}
