import type { ReactNode } from 'react';
import type { FigureOut } from '../../../../shared/contracts/balance.ts';
import { FigureValue } from '../../../components/ui/figure.tsx';
import { PriorityMark } from '../../../components/ui/priority-mark.tsx';
import { useBalanceAge } from '../hooks/balance-clock.ts';
import { useActiveAlarm } from '../hooks/alarm-index.ts';
import { boardFigure, useUnitSystem } from '../unit-display.ts';

/**
 * A balance figure with its unit, quality mark and the age of the balance it comes from.
 * `percent` shows a fraction (unit '-') as per cent; `round` rounds to that many decimals first,
 * so a slope of 1e-17 m/h reads 0, not 0.0000. Every board figure passes here, so this is where
 * it takes the plant's unit system.
 */
export function LiveFigure({ f, digits, size = 'md', percent = false, round, label }: { f: FigureOut; digits?: number; size?: 'sm' | 'md' | 'lg'; percent?: boolean; round?: number; label?: string }) {
  const age = useBalanceAge();
  const system = useUnitSystem();
  const shown = percent ? { value: f.value === null ? null : f.value * 100, unit: '%' } : boardFigure(system, f.value, f.unit);
  let value = shown.value;
  if (value !== null && round !== undefined) value = Math.round(value * 10 ** round) / 10 ** round + 0;
  return <FigureValue value={value} unit={shown.unit} quality={f.quality} reasons={f.reasons} age_s={age} digits={digits} size={size} label={label} />;
}

/** The alarm that watches a figure: rule and target as the alarm engine names them, and the word shown when it is active. */
export interface Watch {
  rule: string;
  target: string;
  word: string;
}

/**
 * An active alarm on a figure, by the alarm's priority mark (shape, colour, number) and a word —
 * never colour alone. Acknowledged alarms keep the word with a hollow mark.
 */
export function AlarmFlag({ watch }: { watch: Watch | undefined }) {
  const a = useActiveAlarm(watch?.rule, watch?.target);
  if (!a || !watch) return null;
  const acked = a.state !== 'raised';
  return (
    <span className="inline-flex items-center gap-0.5 self-center" data-testid={`flag-${watch.rule}`} title={a.message}>
      <PriorityMark priority={a.priority} muted={acked} />
      <span className="text-[10px] font-semibold" style={{ color: `var(--color-alarm-${a.priority})` }}>
        {watch.word}
      </span>
    </span>
  );
}

/**
 * One labelled row: label left (truncated, full text on hover), then the alarm flag (never
 * truncated away), then the value right-aligned in a fixed-width cell so numbers never shift.
 */
export function Row({ label, children, watch }: { label: string; children: ReactNode; watch?: Watch }) {
  return (
    <div className="grid grid-cols-[minmax(0,1fr)_auto_auto] items-baseline gap-x-1 h-[22px]" data-figure={label}>
      <span className="text-ink-2 text-[12px] truncate" title={label}>
        {label}
      </span>
      <AlarmFlag watch={watch} />
      <span className="min-w-[140px] text-right whitespace-nowrap">{children}</span>
    </div>
  );
}

export function FigureRow({ label, f, digits, percent, round, watch }: { label: string; f: FigureOut; digits?: number; percent?: boolean; round?: number; watch?: Watch }) {
  return (
    <Row label={label} watch={watch}>
      <LiveFigure f={f} digits={digits} percent={percent} round={round} label={label} />
    </Row>
  );
}
