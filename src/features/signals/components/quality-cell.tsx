import { qualityFlags, qualityGrade } from '../../../../shared/contracts/sample-quality.ts';

const FLAG_TEXT: Record<string, string> = {
  sourceStatus: 'source status',
  outOfRange: 'out of range',
  flatLine: 'flat line',
  spike: 'spike',
  clockSkew: 'clock skew',
};

/**
 * Quality as words, never colour alone: "good" stays grey; uncertain, bad and stale get a
 * bordered mark in their abnormal colour, followed by the reasons (flags).
 */
export function QualityCell({ code, stale }: { code: number | null; stale: boolean }) {
  if (code === null) return <Mark cls="border-unavailable text-unavailable">NO VALUE</Mark>;
  const grade = qualityGrade(code);
  const flags = qualityFlags(code).map((f) => FLAG_TEXT[f] ?? f);
  const mark =
    grade === 'bad' ? (
      <Mark cls="border-alarm-1 text-alarm-1">BAD</Mark>
    ) : grade === 'uncertain' ? (
      <Mark cls="border-estimated text-estimated">UNCERTAIN</Mark>
    ) : (
      <span className="text-ink-3">good</span>
    );
  return (
    <span className="inline-flex items-center gap-1 min-w-0" data-grade={grade} title={flags.join(', ') || undefined}>
      {mark}
      {stale ? <Mark cls="border-unavailable text-unavailable">STALE</Mark> : null}
      {flags.length ? <span className="truncate text-ink-2 text-[11px]">{flags.join(', ')}</span> : null}
    </span>
  );
}

function Mark({ cls, children }: { cls: string; children: string }) {
  return <span className={`shrink-0 text-[10px] leading-[14px] px-1 border rounded-[2px] font-semibold ${cls}`}>{children}</span>;
}
