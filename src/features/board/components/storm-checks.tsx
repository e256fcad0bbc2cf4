import type { z } from 'zod';
import type { stormCheckOut } from '../../../../shared/contracts/balance.ts';
import { formatValue } from '../../../lib/format.ts';

type Check = z.infer<typeof stormCheckOut>;

const RULES: Record<Check['rule'], { label: string; show: (v: number) => string; cmp: string }> = {
  'min-mlss': { label: 'Basin MLSS stays up', show: (v) => `${formatValue(v, 3)} g/L`, cmp: '≥' },
  'max-stored-fraction': { label: 'Sludge stored in clarifiers', show: (v) => `${formatValue(v * 100, 3)} %`, cmp: '≤' },
  'max-blanket-rise': { label: 'Blanket rise', show: (v) => `${formatValue(v, 2)} m`, cmp: '≤' },
};

/**
 * The storm rules of thumb, each as PASS or FAIL in words and by shape (a tick in a circle, a
 * cross in a diamond) so the result never rests on colour; only a failed check is coloured.
 */
export function StormChecks({ checks }: { checks: Check[] }) {
  if (!checks.length) return <p className="text-[12px] text-ink-3">No checks: the projection is unavailable.</p>;
  return (
    <ul className="flex flex-col gap-0.5" data-testid="storm-checks" aria-label="Storm checks">
      {checks.map((c) => {
        const r = RULES[c.rule];
        return (
          <li key={c.rule} className="grid grid-cols-[52px_1fr_auto] items-center gap-1.5 h-[20px] text-[12px]" data-check={c.rule} data-ok={c.ok}>
            <span className={`inline-flex items-center gap-1 font-semibold ${c.ok ? 'text-ink-2' : 'text-alarm-2'}`}>
              <svg width="12" height="12" viewBox="0 0 12 12" aria-hidden="true">
                {c.ok ? (
                  <>
                    <circle cx="6" cy="6" r="5" fill="none" stroke="currentColor" strokeWidth="1.2" />
                    <path d="M3.4 6.2 L5.3 8 L8.7 4.2" fill="none" stroke="currentColor" strokeWidth="1.4" />
                  </>
                ) : (
                  <>
                    <path d="M6 0.5 L11.5 6 L6 11.5 L0.5 6 Z" fill="currentColor" />
                    <path d="M4 4 L8 8 M8 4 L4 8" stroke="#fff" strokeWidth="1.4" />
                  </>
                )}
              </svg>
              {c.ok ? 'PASS' : 'FAIL'}
            </span>
            <span className="text-ink-2 truncate">{r.label}</span>
            <span className="num text-[12px] text-ink text-right">
              {r.show(c.value)} {c.ok ? r.cmp : `not ${r.cmp}`} {r.show(c.limit)}
            </span>
          </li>
        );
      })}
    </ul>
  );
}
