import type { PlantModelOut } from '../../../../shared/contracts/plant-model.ts';

const ROW_H = 64;

/**
 * The flow path drawn from the model, one lane per train: influent → basins → clarifiers →
 * effluent, RAS back to the basins underneath, WAS out. Grey by default, units out of service
 * dashed (ISA-101: colour is kept for abnormal states).
 */
export function FlowSchematic({ model }: { model: PlantModelOut }) {
  if (!model.trains.length) return <p className="text-[12px] text-ink-3">The flow path appears once a train exists.</p>;
  const h = model.trains.length * ROW_H + 8;
  return (
    <svg viewBox={`0 0 420 ${h}`} className="w-full" role="img" aria-label="Flow path: influent, aeration basins, clarifiers, RAS back, WAS out" data-testid="flow-schematic">
      <defs>
        <marker id="arrow" viewBox="0 0 6 6" refX="5" refY="3" markerWidth="6" markerHeight="6" orient="auto">
          <path d="M0,0 L6,3 L0,6 z" className="fill-ink-3" />
        </marker>
      </defs>
      {model.trains.map((t, i) => {
        const y = 8 + i * ROW_H;
        const mid = y + 18;
        const bw = t.basins.length ? 120 / t.basins.length : 120;
        const ras = t.pumps.filter((p) => p.kind === 'ras');
        const was = t.pumps.filter((p) => p.kind === 'was');
        return (
          <g key={t.id} className="text-[9px]">
            <text x={2} y={mid + 3} className="fill-ink-2">
              {t.code}
            </text>
            <line x1={24} y1={mid} x2={58} y2={mid} className="stroke-ink-3" markerEnd="url(#arrow)" />
            {t.basins.map((b, j) => (
              <g key={b.id}>
                <rect x={60 + j * bw} y={y + 4} width={bw - 4} height={28} className={`fill-panel-2 stroke-ink-2 ${b.inService ? '' : 'opacity-50'}`} strokeDasharray={b.inService ? undefined : '3 2'} />
                <text x={62 + j * bw} y={mid + 3} className="fill-ink">
                  {b.code}
                </text>
              </g>
            ))}
            {t.basins.length === 0 ? <text x={62} y={mid + 3} className="fill-unavailable">no basin</text> : null}
            <line x1={182} y1={mid} x2={218} y2={mid} className="stroke-ink-3" markerEnd="url(#arrow)" />
            {t.clarifiers.map((c, j) => (
              <g key={c.id}>
                <circle cx={236 + j * 40} cy={mid} r={15} className={`fill-panel-2 stroke-ink-2 ${c.inService ? '' : 'opacity-50'}`} strokeDasharray={c.inService ? undefined : '3 2'} />
                <text x={236 + j * 40} y={mid + 3} textAnchor="middle" className="fill-ink">
                  {c.code}
                </text>
              </g>
            ))}
            {t.clarifiers.length === 0 ? <text x={222} y={mid + 3} className="fill-unavailable">no clarifier</text> : null}
            <line x1={236 + Math.max(t.clarifiers.length, 1) * 40 - 20} y1={mid} x2={410} y2={mid} className="stroke-ink-3" markerEnd="url(#arrow)" />
            <text x={378} y={mid - 4} className="fill-ink-3">
              out
            </text>
            {/* RAS from the clarifier underflow back to the basin inlet */}
            <polyline points={`236,${mid + 15} 236,${y + 50} 70,${y + 50} 70,${y + 34}`} fill="none" className="stroke-ink-3" markerEnd="url(#arrow)" />
            <text x={120} y={y + 48} className="fill-ink-2">
              RAS {ras.map((p) => p.code).join(', ') || '—'}
            </text>
            <line x1={236} y1={y + 50} x2={300} y2={y + 50} className="stroke-ink-3" />
            <line x1={300} y1={y + 50} x2={330} y2={y + 50} className="stroke-ink-3" markerEnd="url(#arrow)" />
            <text x={334} y={y + 53} className="fill-ink-2">
              WAS {was.map((p) => p.code).join(', ') || '—'}
            </text>
          </g>
        );
      })}
    </svg>
  );
}
