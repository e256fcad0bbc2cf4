import { Group } from '@visx/group';
import { scaleLinear } from '@visx/scale';
import { Line, LinePath } from '@visx/shape';
import { useId } from 'react';
import type { BalanceData } from '../../../../shared/contracts/balance.ts';
import { formatValue } from '../../../lib/format.ts';
import { LiveFigure } from './live-figure.tsx';

type Timeline = BalanceData['trains'][number]['storm']['timeline'];

const RULE_TEXT: Record<NonNullable<Timeline['firstFailedRule']>, string> = {
  'min-mlss': 'basin MLSS falls below its minimum',
  'max-stored-fraction': 'sludge stored in the clarifiers exceeds its limit',
  'max-blanket-rise': 'the blanket rise exceeds its limit',
  'blanket-below-surface': 'the blanket reaches the clarifier surface',
};

const W = 300;
const H = 74;
const M = { l: 30, r: 6, t: 6, b: 16 };
const INK = '#1f2327';
const INK3 = '#6d747a';
const EDGE = '#a9adb1';
const ALARM = '#e07000';

/**
 * The design storm in time for one train (shared/domain/storm-timeline.ts): the time to the
 * first failed check, the peak blanket against the clarifier depth, and a sparkline of the
 * blanket level over the storm with the storm's flow behind it. The flow is recovered from each
 * point's required RAS concentration by the mass balance X_R = X·(Q + Q_R)/Q_R, i.e.
 * Q = Q_R·(X_R/X − 1), with the train's present RAS flow Q_R, which the projection holds.
 */
export function StormTimeline({ timeline, depth_m, rasFlow_m3h }: { timeline: Timeline; depth_m: number | null; rasFlow_m3h: number | null }) {
  const clip = useId().replace(/:/g, '');
  const pts = timeline.points;
  const failed = timeline.firstFailure_h !== null;
  return (
    <div data-testid="storm-timeline" data-failed={failed}>
      <p className={`text-[12px] ${failed ? 'text-alarm-2 font-semibold' : 'text-ink-2'}`} data-testid="storm-first-failure">
        {pts.length === 0
          ? 'Storm in time unavailable'
          : failed
            ? `First check fails after ${formatValue(timeline.firstFailure_h, 2)} h: ${timeline.firstFailedRule ? RULE_TEXT[timeline.firstFailedRule] : 'a check'}`
            : 'No check fails within the design storm'}
      </p>
      <div className="flex items-center gap-2 text-[12px]">
        <span className="text-ink-2">Peak blanket</span>
        <LiveFigure f={timeline.peakBlanket_m} digits={3} size="sm" label="peak blanket level over the design storm" />
        <span className="text-ink-3">of {depth_m === null ? '—' : formatValue(depth_m, 3)} m depth</span>
        {timeline.blanketReachesSurface_h !== null ? <span className="text-alarm-2 font-semibold">at surface after {formatValue(timeline.blanketReachesSurface_h, 2)} h</span> : null}
      </div>
      {pts.length > 1 && depth_m !== null ? <Sparkline clip={clip} pts={pts} depth_m={depth_m} rasFlow_m3h={rasFlow_m3h} failAt={timeline.firstFailure_h} /> : null}
    </div>
  );
}

function Sparkline({ clip, pts, depth_m, rasFlow_m3h, failAt }: { clip: string; pts: Timeline['points']; depth_m: number; rasFlow_m3h: number | null; failAt: number | null }) {
  const tEnd = pts[pts.length - 1]!.t_h;
  const x = scaleLinear({ domain: [0, tEnd], range: [M.l, W - M.r] });
  const y = scaleLinear({ domain: [0, depth_m], range: [H - M.b, M.t] });
  const flow = pts.map((p) => (rasFlow_m3h !== null && rasFlow_m3h > 0 && p.rasConcRequired_gL !== null && p.mlss_gL > 0 ? rasFlow_m3h * (p.rasConcRequired_gL / p.mlss_gL - 1) : null));
  const fMax = Math.max(0, ...flow.map((f) => f ?? 0));
  const yf = scaleLinear({ domain: [0, fMax * 1.1 || 1], range: [H - M.b, M.t] });
  const flowPts = pts.flatMap((p, i) => (flow[i] == null ? [] : [[p.t_h, flow[i]!] as const]));
  const mono = { fontSize: 9, fill: INK3, fontFamily: 'JetBrains Mono, monospace' } as const;
  return (
    <svg width={W} height={H} viewBox={`0 0 ${W} ${H}`} role="img" aria-labelledby={`${clip}-t`} className="block max-w-full h-auto mt-0.5" data-testid="storm-sparkline">
      <title id={`${clip}-t`}>{`Blanket level over the design storm (${formatValue(tEnd, 3)} h) against the ${formatValue(depth_m, 3)} m clarifier depth; grey area: the storm's influent flow`}</title>
      <defs>
        <clipPath id={clip}>
          <rect x={M.l} y={M.t} width={W - M.l - M.r} height={H - M.t - M.b} />
        </clipPath>
      </defs>
      <Group clipPath={`url(#${clip})`}>
        {flowPts.length > 1 ? (
          <path
            d={`M${x(flowPts[0]![0])},${yf(0)} ${flowPts.map(([t, f]) => `L${x(t)},${yf(f)}`).join(' ')} L${x(flowPts[flowPts.length - 1]![0])},${yf(0)} Z`}
            fill="#d5d8db"
            data-testid="storm-hydrograph"
          />
        ) : null}
        <Line from={{ x: M.l, y: y(depth_m) }} to={{ x: W - M.r, y: y(depth_m) }} stroke={INK} strokeWidth={1} strokeDasharray="4 2" />
        <LinePath data={pts} x={(p) => x(p.t_h)} y={(p) => y(p.blanket_m)} stroke={INK} strokeWidth={1.5} data-testid="storm-blanket-line" />
        {failAt !== null ? <Line from={{ x: x(failAt), y: M.t }} to={{ x: x(failAt), y: H - M.b }} stroke={ALARM} strokeWidth={1.5} /> : null}
      </Group>
      <Line from={{ x: M.l, y: H - M.b }} to={{ x: W - M.r, y: H - M.b }} stroke={EDGE} />
      <text {...mono} x={M.l - 3} y={y(depth_m) + 3} textAnchor="end">{formatValue(depth_m, 2)}</text>
      <text {...mono} x={M.l - 3} y={H - M.b + 3} textAnchor="end">0 m</text>
      <text {...mono} x={M.l} y={H - 4} textAnchor="start">0 h</text>
      <text {...mono} x={W - M.r} y={H - 4} textAnchor="end">{`${formatValue(tEnd, 3)} h`}</text>
      <text {...mono} x={(M.l + W - M.r) / 2} y={H - 4} textAnchor="middle">blanket · surface --- · flow ▒</text>
    </svg>
  );
}
