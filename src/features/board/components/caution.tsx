/** Shown beside every figure that drives an operating decision (design: advisory, read-only toward the plant). */
export const ADVISORY = 'Advisory only — check against lab results and procedures; the licensed operator decides.';

export function Caution() {
  return (
    <p className="mt-1 text-[11px] leading-[14px] text-ink-3 italic" data-testid="caution">
      {ADVISORY}
    </p>
  );
}
