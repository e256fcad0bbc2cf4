import { memo } from 'react';
import type { FigureOut } from '../../../../shared/contracts/balance.ts';
import { formatValue } from '../../../lib/format.ts';
import { useActiveAlarm } from '../hooks/alarm-index.ts';

/**
 * Where the sludge is: a horizontal bar split into the aeration-basin mass and the
 * clarifier-blanket mass, with the storm storage limit (max stored fraction) as a dashed tick.
 * Greys for the normal split; the clarifier part takes the alarm colour, and says so in words,
 * only while the watched alarm (stored-fraction-high) is active.
 */
export const MassSplitBar = memo(function MassSplitBar({
  basin,
  clarifier,
  limitFraction,
  limitLabel,
  watch,
}: {
  basin: FigureOut;
  clarifier: FigureOut;
  limitFraction: number | null;
  limitLabel: string;
  watch?: { rule: string; target: string };
}) {
  const alarm = useActiveAlarm(watch?.rule, watch?.target);
  const W = 100;
  const b = basin.value;
  const c = clarifier.value;
  const known = b !== null && c !== null && b + c > 0;
  const frac = known ? c / (b + c) : null;
  const over = alarm !== undefined;
  const overColour = alarm ? `var(--color-alarm-${alarm.priority})` : '#5f666d';
  return (
    <figure className="m-0" aria-label="Solids inventory split" data-testid="mass-split">
      <div className="flex justify-between text-[11px] text-ink-3 h-[14px]">
        <span>Aeration basins</span>
        <span>Clarifier blankets</span>
      </div>
      <div className="relative">
        <svg viewBox={`0 0 ${W} 14`} preserveAspectRatio="none" className="block w-full h-[18px]" role="img" aria-label={known ? `clarifiers hold ${formatValue(frac! * 100, 3)} % of the train's sludge` : 'split unknown'}>
          <rect x="0" y="0" width={W} height="14" fill="var(--color-panel-2)" stroke="var(--color-edge)" strokeWidth="0.3" />
          {known ? (
            <>
              <rect x="0" y="0" width={W * (1 - frac!)} height="14" fill="#9aa0a6" data-testid="mass-basin" />
              <rect x={W * (1 - frac!)} y="0" width={W * frac!} height="14" fill={overColour} data-testid="mass-clarifier" />
            </>
          ) : null}
          {limitFraction !== null ? <line x1={W * (1 - limitFraction)} x2={W * (1 - limitFraction)} y1="-1" y2="15" stroke="var(--color-ink)" strokeWidth="0.6" strokeDasharray="1.2 0.8" vectorEffect="non-scaling-stroke" /> : null}
        </svg>
        {/* In HTML, not SVG text: the bar stretches with preserveAspectRatio="none" and would stretch the words too. */}
        {known ? null : <span className="absolute inset-0 flex items-center justify-center text-[11px] text-ink-3 pointer-events-none">split unknown</span>}
      </div>
      <div className="flex justify-between text-[11px] h-[15px]">
        <span className="num text-ink-2">{known ? `${formatValue((1 - frac!) * 100, 3)} %` : '—'}</span>
        {limitFraction !== null ? (
          <span className="text-ink-3">
            ┆ {limitLabel} {formatValue(limitFraction * 100, 2)} % in clarifiers
          </span>
        ) : null}
        <span className={`num ${over ? 'font-semibold' : 'text-ink-2'}`} style={over ? { color: overColour } : undefined}>
          {over ? 'HIGH ' : ''}
          {known ? `${formatValue(frac! * 100, 3)} %` : '—'}
        </span>
      </div>
    </figure>
  );
});

/**
 * Side view of one clarifier: water depth with a metre scale, the sludge blanket filled from the
 * floor to its level, the blanket alarm limit while that alarm is active, and — dashed — where
 * the storm projection would put the blanket top (drawn only for a rise of 1 cm or more). An
 * unavailable level says so instead of drawing an empty tank.
 */
export const ClarifierSection = memo(function ClarifierSection({ code, depth_m, level, rise_m, rate }: { code: string; depth_m: number; level: FigureOut; rise_m: FigureOut; rate: FigureOut }) {
  const high = useActiveAlarm('blanket-high', code);
  const W = 320;
  const H = 120;
  const top = 20;
  const left = 24;
  const right = W - 70;
  const floor = H - 6;
  const y = (m: number) => floor - (floor - top) * Math.min(Math.max(m / depth_m, 0), 1.08);
  const ticks = Array.from({ length: Math.floor(depth_m) + 1 }, (_, i) => i);
  const lv = level.quality === 'unavailable' ? null : level.value;
  const rise = rise_m.quality === 'unavailable' ? null : rise_m.value;
  const storm = lv !== null && rise !== null && rise >= 0.01 ? lv + rise : null;
  const overflowing = storm !== null && storm > depth_m;
  const grey = '#7d848b';
  // Above an active blanket-level limit only the excess takes the alarm colour: the picture shows how far over.
  const excess = high?.limit != null && lv !== null && lv > high.limit ? high.limit : null;
  const r = rate.quality === 'unavailable' ? null : rate.value;
  return (
    <svg
      viewBox={`0 0 ${W} ${H}`}
      className="block w-full max-w-[420px] h-auto"
      role="img"
      aria-label={`clarifier ${code}: blanket ${lv === null ? 'unknown' : `${formatValue(lv, 3)} m`} above the floor of a ${formatValue(depth_m, 3)} m deep tank${high ? `, above its alarm limit of ${formatValue(high.limit, 3)} m` : ''}`}
      data-testid={`clarifier-section-${code}`}
    >
      <path d={`M${left} ${top - 8} V${floor} H${right} V${top - 8}`} fill="none" stroke="var(--color-ink-2)" strokeWidth="1.4" />
      <line x1={left} x2={right} y1={y(depth_m)} y2={y(depth_m)} stroke="var(--color-ink-3)" strokeWidth="0.8" />
      <text x={right + 4} y={y(depth_m) + 3} fontSize="9" fill="var(--color-ink-3)">
        surface
      </text>
      {ticks.map((m) => (
        <g key={m}>
          <line x1={left - 4} x2={left} y1={y(m)} y2={y(m)} stroke="var(--color-ink-3)" strokeWidth="0.8" />
          <text x={left - 6} y={y(m) + 3} textAnchor="end" fontSize="9" fontFamily="JetBrains Mono, monospace" fill="var(--color-ink-3)">
            {m}
          </text>
        </g>
      ))}
      <text x={2} y={9} fontSize="9" fill="var(--color-ink-3)">
        height above floor [m]
      </text>
      {lv !== null ? (
        <>
          <rect x={left + 0.7} y={y(lv)} width={right - left - 1.4} height={floor - y(lv)} fill={grey} data-testid="blanket-fill" />
          {excess !== null ? (
            <rect x={left + 0.7} y={y(lv)} width={right - left - 1.4} height={y(excess) - y(lv)} fill={`var(--color-alarm-${high!.priority})`} data-testid="blanket-excess" />
          ) : null}
          <text x={right + 4} y={y(lv) + 3} fontSize="9" fontFamily="JetBrains Mono, monospace" fill="var(--color-ink)">
            {formatValue(lv, 3)} m
          </text>
          {r !== null && Math.abs(r) >= 0.05 ? (
            <text x={right + 4} y={y(lv) + 14} fontSize="9" fill="var(--color-ink-2)">
              {r > 0 ? '▲' : '▼'} {formatValue(Math.abs(r), 2)} m/h
            </text>
          ) : null}
        </>
      ) : (
        <text x={(left + right) / 2} y={H / 2} textAnchor="middle" fontSize="10" fill="var(--color-ink-3)">
          blanket level unavailable
        </text>
      )}
      {high?.limit != null ? (
        <>
          <line x1={left} x2={right} y1={y(high.limit)} y2={y(high.limit)} stroke="var(--color-ink)" strokeWidth="1" strokeDasharray="1 2" data-testid="blanket-limit" />
          <text x={left + 4} y={y(high.limit) + 11} fontSize="9" fill={lv !== null && lv >= high.limit ? '#fff' : 'var(--color-ink)'}>
            alarm limit {formatValue(high.limit, 3)} m
          </text>
        </>
      ) : null}
      {storm !== null ? (
        <>
          <line x1={left} x2={right} y1={y(storm)} y2={y(storm)} stroke="var(--color-ink)" strokeWidth="1.2" strokeDasharray="5 3" data-testid="storm-line" />
          <text x={right - 3} y={y(storm) - 3} textAnchor="end" fontSize="9" fill="var(--color-ink)">
            {overflowing ? 'storm: blanket reaches the surface' : `storm ${formatValue(storm, 3)} m`}
          </text>
        </>
      ) : null}
    </svg>
  );
});
