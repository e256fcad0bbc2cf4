import { AxisBottom, AxisLeft } from '@visx/axis';
import { Group } from '@visx/group';
import { scaleLinear, scaleUtc } from '@visx/scale';
import { forwardRef, useMemo, useState, type PointerEvent } from 'react';
import type { SamplesResponse } from '../../../../shared/contracts/plant-api.ts';
import { formatValue, prettyUnit } from '../../../lib/format.ts';
import { gapLimitMs, shapeSeries } from '../series-shape.ts';

export interface ChartPen {
  tagId: number;
  name: string;
  unit: string;
  expectedPeriod_s: number | undefined;
  data: SamplesResponse | undefined;
  pending: boolean;
}

const M = { left: 72, right: 22, top: 4 };
const GAP = 10;
const AXIS_H = 24;
const INK = '#1f2327';
const INK3 = '#6d747a';
const EDGE = '#a9adb1';
const EST = '#8a6d00';
const BAD = '#c8102e';
const FOCUS = '#1d4f91';

const RES_TEXT = { raw: 'raw samples', '1m': '1 min rollup', '1h': '1 h rollup' } as const;

/** UTC tick labels, coarser as the window grows. */
function tickText(d: Date, spanMs: number): string {
  const iso = d.toISOString();
  if (spanMs <= 2 * 86_400_000) return iso.slice(11, 16);
  if (spanMs <= 90 * 86_400_000) return `${iso.slice(5, 10)} ${iso.slice(11, 13)}h`;
  return iso.slice(0, 10);
}

/**
 * Multi-pen trend: one lane per pen with its own y scale and unit, one shared UTC time axis.
 * Lines break over gaps (hatched "no data"); segments touching uncertain or bad points are
 * dashed and those points marked (ring = uncertain, cross = bad); bucketed data shows its
 * min–max envelope. Drag across the plot to zoom into that span.
 */
export const TrendChart = forwardRef<SVGSVGElement, { pens: ChartPen[]; fromMs: number; toMs: number; nowMs: number; width: number; onZoom(fromMs: number, toMs: number): void }>(function TrendChart(
  { pens, fromMs, toMs, nowMs, width, onZoom },
  ref,
) {
  const laneH = pens.length <= 1 ? 300 : pens.length === 2 ? 210 : pens.length === 3 ? 160 : 125;
  const height = M.top + pens.length * (laneH + GAP) + AXIS_H;
  const innerW = Math.max(100, width - M.left - M.right);
  const x = useMemo(() => scaleUtc({ domain: [new Date(fromMs), new Date(toMs)], range: [0, innerW] }), [fromMs, toMs, innerW]);
  const [drag, setDrag] = useState<{ a: number; b: number } | null>(null);
  const [hover, setHover] = useState<number | null>(null);
  const span = toMs - fromMs;

  const lanes = useMemo(
    () =>
      pens.map((p) => {
        const pts = p.data?.points ?? [];
        const gapMs = gapLimitMs(p.data?.step_s ?? null, p.expectedPeriod_s, pts);
        const shape = shapeSeries(pts, gapMs, [fromMs, toMs], nowMs);
        let lo = Infinity;
        let hi = -Infinity;
        for (const pt of pts) {
          for (const v of [pt.value, pt.min, pt.max]) {
            if (v === null || v === undefined) continue;
            if (v < lo) lo = v;
            if (v > hi) hi = v;
          }
        }
        if (!Number.isFinite(lo)) [lo, hi] = [0, 1];
        if (lo === hi) [lo, hi] = [lo - (Math.abs(lo) * 0.05 || 1), hi + (Math.abs(hi) * 0.05 || 1)];
        const y = scaleLinear({ domain: [lo, hi], range: [laneH - 8, 20], nice: true });
        const ticks = y.ticks(4);
        const decimals = ticks.length > 1 ? Math.max(0, Math.ceil(-Math.log10(ticks[1]! - ticks[0]!) - 1e-9)) : 2;
        // Too many points to tell one marker or dash from the next: quality is then shown by the
        // strip along the lane's foot only, and the line stays solid.
        const dense = pts.length > innerW / 4;
        return { p, shape, y, pts, gapMs, ticks, decimals, dense };
      }),
    [pens, fromMs, toMs, nowMs, laneH, innerW],
  );

  const localX = (e: PointerEvent<SVGRectElement>) => {
    const r = (e.currentTarget as SVGRectElement).getBoundingClientRect();
    return Math.min(innerW, Math.max(0, e.clientX - r.left));
  };
  const plotH = pens.length * (laneH + GAP) - GAP;
  const hoverT = hover === null ? null : x.invert(hover).getTime();

  return (
    <svg ref={ref} width={width} height={height} role="img" aria-label={`Trend of ${pens.map((p) => p.name).join(', ')}`} data-testid="trend-chart" fontFamily="JetBrains Mono, ui-monospace, monospace">
      <defs>
        <pattern id="trend-gap-hatch" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)">
          <rect width="6" height="6" fill="#dfe1e3" />
          <line x1="0" y1="0" x2="0" y2="6" stroke="#b9bdc1" strokeWidth="2" />
        </pattern>
      </defs>
      <Group left={M.left} top={M.top}>
        {lanes.map(({ p, shape, y, pts, gapMs, ticks, decimals, dense }, i) => {
          const line = (run: { t: number; v: number }[]) => run.map((q, k) => `${k ? 'L' : 'M'}${x(new Date(q.t)).toFixed(1)},${y(q.v).toFixed(1)}`).join('');
          const near = hoverT === null || !pts.length ? null : nearestPoint(pts, hoverT);
          const nearest = near && Math.abs(Date.parse(near.ts) - hoverT!) <= gapMs / 2 ? near : null;
          const title = `${p.name}  ${prettyUnit(p.unit)} · ${p.data ? RES_TEXT[p.data.resolution] : 'loading'}${p.data?.step_s ? ` · ${formatStep(p.data.step_s)} buckets` : ''} · ${pts.length} points${p.pending ? ' · loading…' : ''}`;
          return (
            <Group key={p.tagId} top={i * (laneH + GAP)} data-testid="trend-lane" data-tag-id={p.tagId} data-resolution={p.data?.resolution ?? ''} data-points={pts.length}>
              <rect width={innerW} height={laneH} fill="#f6f7f7" stroke={EDGE} />
              <clipPath id={`lane-clip-${p.tagId}`}>
                <rect width={innerW} height={laneH} />
              </clipPath>
              <g clipPath={`url(#lane-clip-${p.tagId})`}>
                {ticks.map((t) => (
                  <line key={t} x1={0} x2={innerW} y1={y(t)} y2={y(t)} stroke="#e2e4e6" />
                ))}
                {shape.gaps.map(([a, b]) => {
                  const x0 = x(new Date(a));
                  const w = x(new Date(b)) - x0;
                  return (
                    <g key={`${a}-${b}`} data-testid="trend-gap">
                      <rect x={x0} y={0} width={Math.max(1, w)} height={laneH} fill="url(#trend-gap-hatch)" opacity={0.8} />
                      {w > 56 ? (
                        <text x={x0 + w / 2} y={laneH / 2} textAnchor="middle" fontSize={10} fill={INK3}>
                          no data
                        </text>
                      ) : null}
                    </g>
                  );
                })}
                {shape.bands.map((band, k) =>
                  band.length > 1 ? (
                    <path
                      key={k}
                      d={`${band.map((q, j) => `${j ? 'L' : 'M'}${x(new Date(q.t)).toFixed(1)},${y(q.hi).toFixed(1)}`).join('')}${band
                        .slice()
                        .reverse()
                        .map((q) => `L${x(new Date(q.t)).toFixed(1)},${y(q.lo).toFixed(1)}`)
                        .join('')}Z`}
                      fill={INK}
                      opacity={0.09}
                    />
                  ) : null,
                )}
                {shape.runs.map((r, k) =>
                  r.pts.length > 1 ? (
                    <path
                      key={k}
                      d={line(r.pts)}
                      fill="none"
                      stroke={r.dashed && !dense ? EST : INK}
                      strokeWidth={1.5}
                      strokeDasharray={r.dashed && !dense ? '5 3' : undefined}
                      data-testid="trend-run"
                      data-dashed={r.dashed && !dense ? 'true' : 'false'}
                    />
                  ) : (
                    <circle key={k} cx={x(new Date(r.pts[0]!.t))} cy={y(r.pts[0]!.v)} r={1.8} fill={INK} data-testid="trend-lone-point" />
                  ),
                )}
                {shape.marks.map((m) => (
                  <rect key={`q${m.t}`} x={x(new Date(m.t)) - 1} y={laneH - 5} width={2.5} height={5} fill={m.quality === 'bad' ? BAD : EST} data-testid="trend-quality-tick" />
                ))}
                {(dense ? [] : shape.marks).map((m) =>
                  m.quality === 'bad' ? (
                    <path key={m.t} d={cross(x(new Date(m.t)), y(m.v))} stroke={BAD} strokeWidth={1.6} data-testid="trend-mark-bad" />
                  ) : (
                    <circle key={m.t} cx={x(new Date(m.t))} cy={y(m.v)} r={3} fill="none" stroke={EST} strokeWidth={1.3} data-testid="trend-mark-uncertain" />
                  ),
                )}
              </g>
              <AxisLeft
                scale={y}
                numTicks={4}
                stroke={EDGE}
                tickStroke={EDGE}
                tickValues={ticks}
                tickFormat={(v) => (Math.abs(Number(v)) >= 1000 ? formatValue(Number(v), 4) : Number(v).toFixed(decimals))}
                tickLabelProps={{ fill: INK3, fontSize: 10, fontFamily: 'JetBrains Mono, ui-monospace, monospace', textAnchor: 'end', dx: -2, dy: 3 }}
              />
              <text x={-M.left + 4} y={12} fontSize={10} fill={INK3} fontFamily="Inter, system-ui, sans-serif">
                {prettyUnit(p.unit)}
              </text>
              <rect x={1} y={1} width={Math.min(innerW - 2, title.length * 6.1 + 10)} height={18} fill="#f6f7f7" opacity={0.9} />
              <text x={6} y={14} fontSize={11} fill={INK3} fontFamily="Inter, system-ui, sans-serif">
                <tspan fontWeight={600} fill={INK}>
                  {p.name}
                </tspan>
                {title.slice(p.name.length)}
              </text>
              {nearest ? (
                <text x={innerW - 6} y={14} textAnchor="end" fontSize={11} fill={INK} data-testid="trend-readout">
                  {formatValue(nearest.value, 4)} {prettyUnit(p.unit)}
                  {nearest.quality !== 'good' ? ` ${nearest.quality.toUpperCase()}` : ''}
                </text>
              ) : hoverT !== null ? (
                <text x={innerW - 6} y={14} textAnchor="end" fontSize={11} fill={INK3} data-testid="trend-readout">
                  no data
                </text>
              ) : null}
            </Group>
          );
        })}
        {nowMs < toMs && nowMs > fromMs ? <line x1={x(new Date(nowMs))} x2={x(new Date(nowMs))} y1={0} y2={plotH} stroke={INK3} strokeDasharray="2 2" /> : null}
        {hover !== null ? <line x1={hover} x2={hover} y1={0} y2={plotH} stroke={INK} strokeWidth={0.75} pointerEvents="none" /> : null}
        {drag ? <rect x={Math.min(drag.a, drag.b)} width={Math.abs(drag.b - drag.a)} y={0} height={plotH} fill={FOCUS} opacity={0.14} pointerEvents="none" data-testid="trend-brush" /> : null}
        <AxisBottom
          top={plotH + 2}
          scale={x}
          numTicks={Math.max(3, Math.floor(innerW / 110))}
          stroke={EDGE}
          tickStroke={EDGE}
          tickFormat={(d) => tickText(d as Date, span)}
          tickLabelProps={{ fill: INK3, fontSize: 10, fontFamily: 'JetBrains Mono, ui-monospace, monospace', textAnchor: 'middle' }}
        />
        <text x={-6} y={plotH + 15} textAnchor="end" fontSize={10} fill={INK3}>
          UTC
        </text>
        {hoverT !== null ? (
          <g transform={`translate(${Math.min(innerW - 64, Math.max(64, hover!))},${plotH + 3})`} pointerEvents="none">
            <rect x={-64} width={128} height={17} fill={INK} rx={2} />
            <text y={12} textAnchor="middle" fontSize={10} fill="#eeeff0">
              {new Date(hoverT).toISOString().slice(0, 19).replace('T', ' ')}Z
            </text>
          </g>
        ) : null}
        <rect
          width={innerW}
          height={plotH}
          fill="transparent"
          style={{ cursor: 'crosshair', touchAction: 'none' }}
          data-testid="trend-overlay"
          onPointerDown={(e) => {
            (e.currentTarget as SVGRectElement).setPointerCapture(e.pointerId);
            const v = localX(e);
            setDrag({ a: v, b: v });
          }}
          onPointerMove={(e) => {
            const v = localX(e);
            setHover(v);
            if (drag) setDrag({ a: drag.a, b: v });
          }}
          onPointerUp={() => {
            if (drag && Math.abs(drag.b - drag.a) > 4) {
              const a = x.invert(Math.min(drag.a, drag.b)).getTime();
              const b = x.invert(Math.max(drag.a, drag.b)).getTime();
              onZoom(a, b);
            }
            setDrag(null);
          }}
          onPointerLeave={() => setHover(null)}
        />
      </Group>
    </svg>
  );
});

function cross(cx: number, cy: number): string {
  const r = 3.2;
  return `M${cx - r},${cy - r}L${cx + r},${cy + r}M${cx - r},${cy + r}L${cx + r},${cy - r}`;
}

function formatStep(s: number): string {
  if (s % 86_400 === 0) return `${s / 86_400} d`;
  if (s % 3600 === 0) return `${s / 3600} h`;
  if (s % 60 === 0) return `${s / 60} min`;
  return `${s} s`;
}

function nearestPoint<T extends { ts: string }>(pts: T[], t: number): T | null {
  let lo = 0;
  let hi = pts.length - 1;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (Date.parse(pts[mid]!.ts) < t) lo = mid + 1;
    else hi = mid;
  }
  const a = pts[Math.max(0, lo - 1)];
  const b = pts[lo];
  if (!a || !b) return a ?? b ?? null;
  return Math.abs(Date.parse(a.ts) - t) <= Math.abs(Date.parse(b.ts) - t) ? a : b;
}
