import type { ReactNode } from 'react';
import type { UseFormRegisterReturn } from 'react-hook-form';
import { Field, TextInput } from '../../../components/ui/controls.tsx';

/** Digits grouped by a narrow no-break space (SI style), fixed decimals; null → "—". */
export function fmt(v: number | null | undefined, digits = 2): string {
  if (v === null || v === undefined || !Number.isFinite(v)) return '—';
  return v
    .toLocaleString('en-US', { minimumFractionDigits: digits, maximumFractionDigits: digits })
    .replace(/,/g, '\u202f');
}

/** A numeric input with its label and unit, registered with its form; the value is typed text, validated on submit. */
export function NumField({
  label,
  unit,
  field,
  error,
  hint,
  width = 'w-24',
}: {
  label: string;
  unit: string;
  field: UseFormRegisterReturn;
  error?: string[] | undefined;
  hint?: ReactNode;
  width?: string;
}) {
  return (
    <Field label={label} unit={unit} error={error} hint={hint}>
      <TextInput {...field} className={`${width} num text-right`} inputMode="decimal" autoComplete="off" aria-invalid={error?.length ? true : undefined} />
    </Field>
  );
}

export interface Readout {
  label: string;
  value: number | null | undefined;
  unit: string;
  digits?: number;
  /** Set when the value itself is abnormal (e.g. a negative margin): shown with a marker and text, not colour alone. */
  abnormal?: string | undefined;
}

/** Results as label · value · unit rows; a missing value says "unavailable" in words. */
export function Readouts({ rows, testId }: { rows: Readout[]; testId?: string }) {
  return (
    <table className="w-full text-[12px]" data-testid={testId}>
      <tbody>
        {rows.map((r) => (
          <tr key={r.label} className="border-b border-edge/40">
            <th scope="row" className="text-left font-normal text-ink-2 py-0.5 pr-2">
              {r.label}
            </th>
            <td className={`num text-right py-0.5 whitespace-nowrap ${r.abnormal ? 'text-alarm-2 font-semibold' : r.value == null ? 'text-unavailable' : ''}`}>
              {r.abnormal ? '▲ ' : ''}
              {r.value == null ? 'unavailable' : fmt(r.value, r.digits ?? 2)}
            </td>
            <td className="text-ink-3 py-0.5 pl-1 whitespace-nowrap">{r.value == null ? '' : r.unit}</td>
            <td className="text-alarm-2 py-0.5 pl-1 text-[11px]">{r.abnormal ?? ''}</td>
          </tr>
        ))}
      </tbody>
    </table>
  );
}

/** Overall quality of a response and its reasons: shape + word + colour, colour only when not good. */
export function QualityLine({ quality, reasons }: { quality?: 'good' | 'estimated' | 'unavailable' | undefined; reasons?: string[] | undefined }) {
  const q = quality ?? 'good';
  const look = q === 'good' ? 'text-ink-3' : q === 'estimated' ? 'text-estimated' : 'text-unavailable';
  const mark = q === 'good' ? '●' : q === 'estimated' ? '◆' : '■';
  return (
    <div className={`text-[12px] mt-1 ${look}`} data-testid="quality">
      <span>
        {mark} Quality: <span className="font-semibold">{q}</span>
      </span>
      {reasons?.length ? (
        <ul className="list-disc pl-5">
          {reasons.map((r) => (
            <li key={r}>{r}</li>
          ))}
        </ul>
      ) : null}
    </div>
  );
}

/** The caution shown wherever a figure drives an operating decision (design: advisory only). */
export function Caution() {
  return <p className="text-[11px] text-ink-3 mt-1 border-l-2 border-edge pl-1.5">Advisory: check against lab results and the plant&apos;s procedures; the licensed operator decides.</p>;
}

/** Header line of a result block; says so when the inputs changed since the result was computed. */
export function ResultHeader({ stale }: { stale: boolean }) {
  return (
    <div className="flex items-baseline gap-2 mt-2 mb-0.5">
      <h3 className="text-[12px] font-semibold text-ink-2">Result</h3>
      {stale ? (
        <span className="text-[11px] text-ink-2 border border-edge bg-panel-2 px-1" role="status">
          ○ inputs changed — press Calculate to update
        </span>
      ) : null}
    </div>
  );
}
