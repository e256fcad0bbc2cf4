import { formatAge, formatValue, prettyUnit } from '../../lib/format.ts';

export type FigureQuality = 'good' | 'estimated' | 'unavailable' | 'uncertain' | 'bad';

/**
 * One process figure: value in the monospaced face, its unit always, its quality as a word
 * mark (not colour alone) and its age. Normal values stay grey; only abnormal quality is marked.
 */
export function FigureValue({
  value,
  unit,
  quality = 'good',
  reasons,
  age_s,
  digits,
  size = 'md',
  label,
}: {
  value: number | null | undefined;
  unit: string;
  quality?: FigureQuality;
  reasons?: string[];
  age_s?: number | null;
  digits?: number;
  size?: 'sm' | 'md' | 'lg';
  label?: string;
}) {
  const text = quality === 'unavailable' || value === null || value === undefined ? '—' : formatValue(value, digits);
  const mark = quality === 'estimated' || quality === 'uncertain' ? 'EST' : quality === 'bad' ? 'BAD' : quality === 'unavailable' ? 'N/A' : null;
  const markColour = quality === 'bad' ? 'border-alarm-1 text-alarm-1' : quality === 'unavailable' ? 'border-unavailable text-unavailable' : 'border-estimated text-estimated';
  const sz = size === 'lg' ? 'text-[22px]' : size === 'sm' ? 'text-[12px]' : 'text-[16px]';
  const title = [label, reasons?.length ? reasons.join('; ') : null, age_s !== undefined ? `age ${formatAge(age_s)}` : null].filter(Boolean).join(' — ');
  return (
    <span className="inline-flex items-baseline gap-1" title={title || undefined} data-quality={quality}>
      <span className={`num ${sz} ${quality === 'unavailable' ? 'text-ink-3' : 'text-ink'}`}>{text}</span>
      <span className="text-ink-3 text-[11px]">{prettyUnit(unit)}</span>
      {mark ? <span className={`text-[9px] leading-[12px] px-0.5 border rounded-[2px] ${markColour}`}>{mark}</span> : null}
      {age_s !== undefined && age_s !== null ? <span className="num text-[10px] text-ink-3">{formatAge(age_s)}</span> : null}
    </span>
  );
}
