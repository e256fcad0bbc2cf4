import { memo, type ReactNode } from 'react';
import type { BalanceData } from '../../../../shared/contracts/balance.ts';
import { FigureValue } from '../../../components/ui/figure.tsx';
import { formatUtc } from '../../../lib/format.ts';
import { Caution } from './caution.tsx';
import { MassSplitBar } from './inventory-picture.tsx';
import { FigureRow, Row } from './live-figure.tsx';

function Box({ title, children, className = '' }: { title: string; children: ReactNode; className?: string }) {
  return (
    <section className={`bg-panel border border-edge rounded-sm h-full ${className}`} aria-label={title}>
      <h2 className="px-2 h-6 leading-6 border-b border-edge bg-panel-2 text-[12px] font-semibold uppercase tracking-wide text-ink-2">{title}</h2>
      <div className="px-2 py-1">{children}</div>
    </section>
  );
}

/** Whole-plant inventory: how much sludge there is and how much of it sits in the clarifiers. */
export const PlantInventory = memo(function PlantInventory({ inv, storedLimit }: { inv: BalanceData['inventory']; storedLimit: number | null }) {
  return (
    <Box title="Plant solids inventory">
      <MassSplitBar basin={inv.aerationMass_kg} clarifier={inv.clarifierMass_kg} limitFraction={storedLimit} limitLabel="storm storage limit" watch={{ rule: 'stored-fraction-high', target: 'plant' }} />
      <div className="grid grid-cols-2 gap-x-4">
        <FigureRow label="Aeration basins" f={inv.aerationMass_kg} digits={4} />
        <FigureRow label="Clarifier blankets" f={inv.clarifierMass_kg} digits={4} />
        <FigureRow label="Total" f={inv.totalMass_kg} digits={4} />
        <FigureRow label="Stored in clarifiers" f={inv.storedFraction} percent watch={{ rule: 'stored-fraction-high', target: 'plant', word: 'HIGH' }} />
      </div>
    </Box>
  );
});

/**
 * Sludge age: rolling and dynamic SRT against the target, and the WAS rate that would hold the
 * target (design §3 item 5), with the operator caution.
 */
export const SrtPanel = memo(function SrtPanel({ srt }: { srt: BalanceData['srt'] }) {
  const off = srt.total_d.value !== null ? (srt.total_d.value - srt.target_d) / srt.target_d : null;
  return (
    <Box title="Sludge age (SRT) and WAS advice">
      <div className="grid grid-cols-1 min-[1700px]:grid-cols-2 gap-x-4">
        <FigureRow label="Total SRT, rolling" f={srt.total_d} watch={{ rule: 'srt-off-target', target: 'plant', word: 'OFF TARGET' }} />
        <Row label="Target">
          <FigureValue value={srt.target_d} unit="d" label="setting srt.target_d" />
        </Row>
        <FigureRow label="Dynamic SRT" f={srt.dynamic_d} />
        <Row label="Rolling against target">
          <span className="num text-[16px]" data-testid="srt-offset">
            {off === null ? '—' : `${off >= 0 ? '+' : '−'}${Math.abs(off * 100).toFixed(0)}`}
          </span>{' '}
          <span className="text-ink-3 text-[11px]">%</span>
        </Row>
        <FigureRow label="Aeration-basin SRT" f={srt.aeration_d} />
        <FigureRow label="Aerobic SRT" f={srt.aerobic_d} />
        <Row label="Window coverage">
          <FigureValue value={srt.coverage * 100} unit="%" digits={3} label="share of the rolling window with data" />
        </Row>
      </div>
      <div className="mt-1 pt-1 border-t border-edge grid grid-cols-1 min-[1700px]:grid-cols-2 gap-x-4" data-testid="was-advice">
        <FigureRow label="WAS flow for target SRT" f={srt.wasAdvice_m3h} />
        <FigureRow label="WAS flow now" f={srt.wasFlow_m3h} />
      </div>
      <Caution />
    </Box>
  );
});

/** The settleability the margins and the storm projection rest on, and where the peak flow comes from. */
export const BasisPanel = memo(function BasisPanel({ settle, storm }: { settle: BalanceData['settleability']; storm: BalanceData['storm'] }) {
  return (
    <Box title="Basis">
      <FigureRow label={`Settleability (${settle.kind ?? 'no test'})`} f={settle.svi_mLg} />
      <Row label="Sampled (UTC)">
        <span className="num text-[12px] text-ink">{formatUtc(settle.sampledAt)}</span>
      </Row>
      <FigureRow label="Peak flow for the storm" f={storm.peakFlow_m3h} digits={4} />
      <Row label="Peak flow from">
        <span className="text-[12px] text-ink">{storm.source === 'plant' ? 'plant layout' : storm.source === 'setting' ? 'setting (× mean influent)' : 'not set'}</span>
      </Row>
    </Box>
  );
});
