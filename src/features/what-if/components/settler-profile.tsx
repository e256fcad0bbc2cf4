import { Group } from '@visx/group';
import { scaleLinear } from '@visx/scale';
import { Bar, Line } from '@visx/shape';
import { fmt } from './calc-parts.tsx';

const ROW = 17;
const LEFT = 76;
const BAR_W = 190;
const VALUE_W = 44;
const W = LEFT + BAR_W + VALUE_W + 118;
const INK = '#1f2327';
const INK2 = '#4b5157';
const INK3 = '#6d747a';

/**
 * Layer TSS of the layered settler, top layer first, as horizontal bars (linear scale; every bar
 * also carries its number so the thin upper layers stay readable), with the feed layer and the
 * blanket top at its threshold marked by text and a dashed line.
 */
export function SettlerProfile({ layers_gL, depth_m, feedLayer, blanketHeight_m, threshold_gL }: { layers_gL: number[]; depth_m: number; feedLayer: number; blanketHeight_m: number | null; threshold_gL: number }) {
  const n = layers_gL.length;
  const top = 18;
  const h = top + n * ROW + 6;
  const max = Math.max(...layers_gL, threshold_gL, 0.001);
  const x = scaleLinear({ domain: [0, max], range: [0, BAR_W], nice: true });
  const yOfHeight = (hb: number) => top + ((depth_m - hb) / depth_m) * n * ROW;
  const lbl = { fontSize: 11, fontFamily: 'Inter, system-ui, sans-serif', fill: INK2 } as const;
  const mono = { fontSize: 11, fontFamily: 'JetBrains Mono, monospace', fill: INK } as const;
  return (
    <svg width={W} height={h} role="img" aria-label={`Settler layer profile, ${n} layers top to bottom, TSS in g/L`} data-testid="settler-profile" className="bg-white border border-edge block">
      <text {...lbl} x={4} y={12}>
        layer
      </text>
      <text {...lbl} x={LEFT} y={12}>
        TSS [g/L]
      </text>
      {/* the blanket line goes under the bars and numbers */}
      {blanketHeight_m != null && blanketHeight_m > 0 ? (
        <Line from={{ x: LEFT - 4, y: yOfHeight(blanketHeight_m) }} to={{ x: W - 2, y: yOfHeight(blanketHeight_m) }} stroke={INK} strokeWidth={1.25} strokeDasharray="5 3" data-testid="blanket-line" />
      ) : null}
      <Group top={top}>
        {layers_gL.map((c, i) => (
          <g key={i}>
            <text {...lbl} x={4} y={i * ROW + 12} fontWeight={i + 1 === feedLayer ? 600 : 400}>
              {`${i + 1}${i === 0 ? ' top' : i === n - 1 ? ' floor' : ''}${i + 1 === feedLayer ? ' ◄feed' : ''}`}
            </text>
            <Bar x={LEFT} y={i * ROW + 2} width={Math.max(1, x(c))} height={ROW - 4} fill={INK3} data-testid="layer-bar" />
            {/* a white plate under the number keeps it readable where the blanket line crosses the row */}
            <rect x={LEFT + Math.max(1, x(c)) + 2} y={i * ROW + 2} width={fmt(c, c < 0.1 ? 3 : 2).length * 6.8 + 4} height={ROW - 4} fill="white" />
            <text {...mono} x={LEFT + Math.max(1, x(c)) + 4} y={i * ROW + 12}>
              {fmt(c, c < 0.1 ? 3 : 2)}
            </text>
          </g>
        ))}
      </Group>
      {blanketHeight_m != null && blanketHeight_m > 0 ? (
        <g>
          <text {...lbl} x={W - 4} y={yOfHeight(blanketHeight_m) - 4} textAnchor="end" fill={INK}>
            {`blanket top ${fmt(blanketHeight_m)} m`}
          </text>
          <text {...lbl} x={W - 4} y={yOfHeight(blanketHeight_m) + 12} textAnchor="end">
            {`above floor, ≥ ${fmt(threshold_gL, 1)} g/L`}
          </text>
        </g>
      ) : null}
    </svg>
  );
}
