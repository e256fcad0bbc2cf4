import { AxisBottom, AxisLeft } from '@visx/axis';
import { GridColumns, GridRows } from '@visx/grid';
import { Group } from '@visx/group';
import { scaleLinear } from '@visx/scale';
import { Line, LinePath } from '@visx/shape';
import { useId } from 'react';
import type { SettlingCorrelationId } from '../../../../shared/domain/settling.ts';
import { fmt } from './calc-parts.tsx';

/** How the views name the settling correlations (the paper and the index it takes). */
export const CORRELATION_LABEL: Record<SettlingCorrelationId, string> = {
  'haertel-poepel-1992': 'Härtel & Pöpel (1992), SVI',
  'daigger-roper-1985': 'Daigger & Roper (1985), SVI',
  'daigger-1995': 'Daigger (1995), SVI',
  'wahlberg-keinath-1988': 'Wahlberg & Keinath (1988), SSVI3.5',
};

export interface StatePointDiagramProps {
  v0_mh: number;
  k_Lg: number;
  mlss_gL: number;
  /** Overflow rate (Q − Q_W)/A [m/h]: slope of the overflow line. */
  overflowRate_mh: number;
  /** Underflow rate (Q_R + Q_W)/A [m/h]. */
  underflowRate_mh: number;
  /** Applied solids loading (Q + Q_R)·X/A [kg/(m²·h)]: y-intercept of the underflow line. */
  solidsLoading_kgm2h: number;
  /** x-intercept of the underflow line [g/L]. */
  requiredUnderflowConc_gL: number | null;
  limitingFlux_kgm2h: number | null;
  limitingConc_gL: number | null;
  /** True when a margin is negative: the state point is drawn as abnormal. */
  abnormal: boolean;
  /** Drawing size [px]; the what-if view uses the default, the board a smaller one per clarifier. */
  width?: number;
  height?: number;
  /** Smaller labels and a shorter key, for the board's per-clarifier diagrams. */
  compact?: boolean;
}

const MARGIN = { l: 58, r: 14, t: 12, b: 44 };
const MC = { l: 44, r: 8, t: 8, b: 32 };
const INK = '#1f2327';
const INK2 = '#4b5157';
const INK3 = '#6d747a';
const EDGE = '#a9adb1';
const ALARM = '#e07000';

/**
 * State point diagram (solids-flux theory, Keinath et al. 1977; state point analysis, Keinath
 * 1985): gravity flux G = v0·X·e^(−kX), total flux for the underflow rate u, the overflow line
 * G = SOR·X, the underflow line from (0, SLR) down to the required underflow concentration, and
 * the state point where the two lines meet (at X = MLSS). Lines differ by weight and dash and are
 * labelled directly, so nothing depends on telling colours apart.
 */
export function StatePointDiagram(p: StatePointDiagramProps) {
  const clip = useId().replace(/:/g, '');
  const W = p.width ?? 620;
  const H = p.height ?? 330;
  const M = p.compact ? MC : MARGIN;
  const fs = p.compact ? 10 : 11;
  const xr = p.requiredUnderflowConc_gL;
  const xMax = Math.min(30, Math.max(p.mlss_gL * 2.5, (xr ?? 0) * 1.12, (p.limitingConc_gL ?? 0) * 1.3, 6));
  const gravityPeak = p.v0_mh / (p.k_Lg * Math.E); // at X = 1/k
  const yMax = Math.max(p.solidsLoading_kgm2h * 1.35, gravityPeak * 1.35, (p.limitingFlux_kgm2h ?? 0) * 1.35, 1);
  const x = scaleLinear({ domain: [0, xMax], range: [M.l, W - M.r], nice: true });
  const y = scaleLinear({ domain: [0, yMax], range: [H - M.b, M.t], nice: true });
  const [, xTop] = x.domain() as [number, number];
  const [, yTop] = y.domain() as [number, number];
  const n = 240;
  const xs = Array.from({ length: n + 1 }, (_, i) => (i / n) * xTop);
  const gravity = (c: number) => p.v0_mh * c * Math.exp(-p.k_Lg * c);
  const total = (c: number) => gravity(c) + p.underflowRate_mh * c;
  const gp = xs.map((c) => [c, gravity(c)] as const);
  const tp = xs.map((c) => [c, total(c)] as const);
  const spX = p.mlss_gL;
  const spY = p.overflowRate_mh * spX;
  // overflow line, drawn to where it leaves the plot
  const ovEndX = Math.min(xTop, p.overflowRate_mh > 0 ? yTop / p.overflowRate_mh : xTop);
  const underEndX = xr ?? xTop;
  const lbl = { fontSize: fs, fill: INK2, fontFamily: 'Inter, system-ui, sans-serif' } as const;
  return (
    <figure className="m-0">
    <svg width={W} height={H} viewBox={`0 0 ${W} ${H}`} role="img" aria-labelledby={`${clip}-t`} data-testid="state-point-diagram" className="bg-white border border-edge block max-w-full h-auto">
      <title id={`${clip}-t`}>
        {`State point diagram: solids flux G [kg/(m²·h)] against concentration X [g/L]; state point at X = ${fmt(spX)} g/L, G = ${fmt(spY)} kg/(m²·h)`}
      </title>
      <defs>
        <clipPath id={clip}>
          <rect x={M.l} y={M.t} width={W - M.l - M.r} height={H - M.t - M.b} />
        </clipPath>
      </defs>
      <GridRows scale={y} left={M.l} width={W - M.l - M.r} stroke="#e3e5e7" numTicks={p.compact ? 4 : 6} />
      <GridColumns scale={x} top={M.t} height={H - M.t - M.b} stroke="#e3e5e7" numTicks={p.compact ? 5 : 8} />
      <Group clipPath={`url(#${clip})`}>
        <LinePath data={gp} x={(d) => x(d[0])} y={(d) => y(d[1])} stroke={INK3} strokeWidth={1.5} data-testid="gravity-flux" />
        <LinePath data={tp} x={(d) => x(d[0])} y={(d) => y(d[1])} stroke={INK} strokeWidth={2} data-testid="total-flux" />
        <Line from={{ x: x(0), y: y(0) }} to={{ x: x(ovEndX), y: y(p.overflowRate_mh * ovEndX) }} stroke={INK2} strokeWidth={1.25} strokeDasharray="6 3" data-testid="overflow-line" />
        <Line from={{ x: x(0), y: y(p.solidsLoading_kgm2h) }} to={{ x: x(underEndX), y: y(p.solidsLoading_kgm2h - p.underflowRate_mh * underEndX) }} stroke={INK2} strokeWidth={1.25} strokeDasharray="2 2" data-testid="underflow-line" />
        {p.limitingFlux_kgm2h != null && p.limitingConc_gL != null ? (
          <>
            <Line from={{ x: x(0), y: y(p.limitingFlux_kgm2h) }} to={{ x: x(xTop), y: y(p.limitingFlux_kgm2h) }} stroke={EDGE} strokeWidth={1} strokeDasharray="1 3" />
            <circle cx={x(p.limitingConc_gL)} cy={y(p.limitingFlux_kgm2h)} r={3} fill="white" stroke={INK} />
          </>
        ) : null}
      </Group>
      {/* direct labels only on points; the lines are named in the key below the plot */}
      {xr != null && xr <= xTop ? (
        <>
          <circle cx={x(xr)} cy={y(0)} r={3} fill={INK2} />
          <PlateLabel x={x(xr) + 4} y={y(0) - 12} anchor="end" fs={fs} text={`X_R,req = ${fmt(xr)} g/L`} />
        </>
      ) : null}
      {p.limitingFlux_kgm2h != null && p.limitingConc_gL != null ? (
        <PlateLabel x={x(p.limitingConc_gL)} y={y(p.limitingFlux_kgm2h) + 17} anchor="middle" fs={fs} text={`G_L = ${fmt(p.limitingFlux_kgm2h)} kg/(m²·h)`} />
      ) : null}
      <g data-testid="state-point-marker">
        {p.abnormal ? (
          <rect x={x(spX) - 6} y={y(spY) - 6} width={12} height={12} fill={ALARM} stroke={INK} transform={`rotate(45 ${x(spX)} ${y(spY)})`} />
        ) : (
          <circle cx={x(spX)} cy={y(spY)} r={5.5} fill={INK} stroke="white" strokeWidth={1.5} />
        )}
        <PlateLabel x={x(spX) + 9} y={y(spY) + 16} anchor="start" fs={fs} fill={p.abnormal ? ALARM : INK} bold text={p.abnormal ? 'state point — margin exceeded' : p.compact ? 'state point' : `state point, X = ${fmt(spX)} g/L`} />
      </g>
      <AxisBottom top={H - M.b} scale={x} numTicks={p.compact ? 5 : 8} stroke={INK3} tickStroke={INK3} tickLabelProps={{ fontSize: fs, fill: INK2, fontFamily: 'JetBrains Mono, monospace' }} />
      <AxisLeft left={M.l} scale={y} numTicks={p.compact ? 4 : 6} stroke={INK3} tickStroke={INK3} tickLabelProps={{ fontSize: fs, fill: INK2, fontFamily: 'JetBrains Mono, monospace', dx: -2 }} />
      <text {...lbl} x={(M.l + W - M.r) / 2} y={H - (p.compact ? 3 : 8)} textAnchor="middle">
        Solids concentration X [g/L]
      </text>
      <text {...lbl} transform={`translate(${p.compact ? 10 : 14} ${(M.t + H - M.b) / 2}) rotate(-90)`} textAnchor="middle">
        Solids flux G [kg/(m²·h)]
      </text>
    </svg>
      <figcaption className={`flex flex-wrap gap-x-4 gap-y-0.5 ${p.compact ? 'text-[10px]' : 'text-[11px]'} text-ink-2 mt-1`} style={{ maxWidth: W }} data-testid="state-point-key">
        <Key dash="" width={2} colour={INK}>{`total flux, u = ${fmt(p.underflowRate_mh, 3)} m/h`}</Key>
        <Key dash="" width={1.5} colour={INK3}>{p.compact ? 'gravity flux v0·X·e^(−kX)' : `gravity flux v0·X·e^(−kX), v0 = ${fmt(p.v0_mh, 2)} m/h, k = ${fmt(p.k_Lg, 3)} L/g`}</Key>
        <Key dash="6 3" width={1.25} colour={INK2}>{`overflow line G = SOR·X, SOR = ${fmt(p.overflowRate_mh, 3)} m/h`}</Key>
        <Key dash="2 2" width={1.25} colour={INK2}>{`underflow line from SLR = ${fmt(p.solidsLoading_kgm2h)} kg/(m²·h)`}</Key>
        {p.limitingFlux_kgm2h != null ? <Key dash="1 3" width={1} colour={EDGE}>{`limiting flux G_L at X_L = ${fmt(p.limitingConc_gL)} g/L`}</Key> : null}
      </figcaption>
    </figure>
  );
}

/** A direct label on a white plate, so a line passing behind it never cuts the text (width estimated for 11 px Inter). */
function PlateLabel({ x, y, text, anchor, fill = INK2, bold = false, fs = 11 }: { x: number; y: number; text: string; anchor: 'start' | 'middle' | 'end'; fill?: string; bold?: boolean; fs?: number }) {
  const w = text.length * fs * 0.555 + 6;
  const left = anchor === 'start' ? x - 3 : anchor === 'middle' ? x - w / 2 : x - w + 3;
  return (
    <g>
      <rect x={left} y={y - 11} width={w} height={15} fill="white" opacity={0.92} />
      <text x={x} y={y} textAnchor={anchor} fontSize={fs} fill={fill} fontWeight={bold ? 600 : 400} fontFamily="Inter, system-ui, sans-serif">
        {text}
      </text>
    </g>
  );
}

function Key({ dash, width, colour, children }: { dash: string; width: number; colour: string; children: string }) {
  return (
    <span className="inline-flex items-center gap-1">
      <svg width={26} height={8} aria-hidden="true">
        <line x1={1} y1={4} x2={25} y2={4} stroke={colour} strokeWidth={width} strokeDasharray={dash || undefined} />
      </svg>
      {children}
    </span>
  );
}
