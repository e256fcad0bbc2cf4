import { useForm } from 'react-hook-form';
import { z } from 'zod';
import { SETTINGS } from '../../../../shared/contracts/settings.ts';
import { Button, Field, FormProblem } from '../../../components/ui/controls.tsx';
import { TextInput } from '../../../components/ui/controls.tsx';
import { applyServerErrors, contractResolver, fieldError, numberOrText } from '../../../lib/form.ts';
import { usePutSettings } from '../api/setup.ts';

type Values = { recipients: string; srtTarget: string; srtWindow: string; peakFactor: string };

// The four settings a plant sets first, each checked by its own schema from the shared registry.
const mainSettings = z.strictObject({
  'mail.recipients': SETTINGS['mail.recipients'].schema,
  'srt.target_d': SETTINGS['srt.target_d'].schema,
  'srt.window_h': SETTINGS['srt.window_h'].schema,
  'storm.peak_flow_factor': SETTINGS['storm.peak_flow_factor'].schema,
});
type Main = z.infer<typeof mainSettings>;

const toBody = (v: Values) => ({
  // One address per line, or separated by commas or spaces.
  'mail.recipients': v.recipients.split(/[\s,;]+/).filter(Boolean),
  'srt.target_d': numberOrText(v.srtTarget),
  'srt.window_h': numberOrText(v.srtWindow),
  'storm.peak_flow_factor': numberOrText(v.peakFactor),
});
const FIELD: Record<keyof Main, keyof Values> = { 'mail.recipients': 'recipients', 'srt.target_d': 'srtTarget', 'srt.window_h': 'srtWindow', 'storm.peak_flow_factor': 'peakFactor' };

/** Mail recipients, SRT target and window and the peak-flow factor as fields (admin: the server checks the role too). */
export function MainSettingsForm({ plantId, values }: { plantId: number; values: Record<string, unknown> }) {
  const put = usePutSettings(plantId);
  const defaults: Values = {
    recipients: ((values['mail.recipients'] as string[] | undefined) ?? []).join('\n'),
    srtTarget: String(values['srt.target_d'] ?? ''),
    srtWindow: String(values['srt.window_h'] ?? ''),
    peakFactor: String(values['storm.peak_flow_factor'] ?? ''),
  };
  const form = useForm<Values, unknown, Main>({ defaultValues: defaults, resolver: contractResolver(mainSettings, toBody) });
  const { register, handleSubmit, formState } = form;
  // Schema paths are the setting keys; the form's fields have their own names.
  const err = (k: keyof Main) => fieldError(formState.errors, k) ?? fieldError(formState.errors, FIELD[k]);
  const onSubmit = handleSubmit((body) => put.mutate({ plantId, values: body }, { onError: (e) => applyServerErrors(e, form) }));
  return (
    <form onSubmit={(e) => void onSubmit(e)} aria-label="Main settings" className="grid grid-cols-[repeat(auto-fill,minmax(160px,1fr))] gap-2 items-start mb-2" noValidate>
      <div className="col-span-full">
        <Field label="Mail recipients" error={err('mail.recipients')} hint="one e-mail address per line; alarm e-mails and the shift summary">
          <textarea {...register('recipients')} rows={3} className="w-full border border-edge rounded-sm px-1 py-0.5 text-[12px] num" />
        </Field>
      </div>
      <Field label="SRT target" unit="d" error={err('srt.target_d')}>
        <TextInput {...register('srtTarget')} inputMode="decimal" className="w-20 num" />
      </Field>
      <Field label="SRT window" unit="h" error={err('srt.window_h')}>
        <TextInput {...register('srtWindow')} inputMode="decimal" className="w-20 num" />
      </Field>
      <Field label="Peak-flow factor" error={err('storm.peak_flow_factor')} hint="storm flow = factor × 24 h mean influent, without a plant peak flow">
        <TextInput {...register('peakFactor')} inputMode="decimal" className="w-20 num" />
      </Field>
      <div className="col-span-full flex items-center gap-2">
        <Button type="submit" kind="primary" disabled={put.isPending}>
          Save settings
        </Button>
        {put.isSuccess && !formState.isDirty ? <span role="status" className="text-ink-2 text-[12px]">Saved.</span> : null}
      </div>
      <FormProblem error={put.error} root={formState.errors.root?.server?.message} />
    </form>
  );
}
