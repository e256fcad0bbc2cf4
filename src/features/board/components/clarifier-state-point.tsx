import { memo } from 'react';
import type { BalanceData } from '../../../../shared/contracts/balance.ts';
import { StatePointDiagram } from '../../what-if/components/state-point-diagram.tsx';
import { FigureRow } from './live-figure.tsx';
import { SettlingSourceLine } from './settling-source.tsx';

type Clarifier = BalanceData['clarifiers'][number];

/**
 * The live state point of one clarifier entry (Keinath 1985): the what-if view's diagram drawn
 * from the balance's figures, the margins beside it and, in one line below, the settling
 * parameters and where they came from. Grey throughout; only a negative margin is coloured (by
 * the diagram's abnormal marker and the figure's own quality/alarm marks).
 */
export const ClarifierStatePoint = memo(function ClarifierStatePoint({ clarifier, settling }: { clarifier: Clarifier; settling: BalanceData['settling'] }) {
  const sp = clarifier.statePoint;
  const v0 = sp.settling.v0_mh;
  const k = sp.settling.k_Lg;
  const x = sp.feed.mlss_gL.value;
  const sor = sp.overflowRate_mh.value;
  const u = sp.underflowRate_mh.value;
  const slr = sp.solidsLoading_kgm2h.value;
  const negative = (f: { value: number | null }) => f.value !== null && f.value < 0;
  return (
    <div data-testid={`state-point-${clarifier.code}`}>
      <div className="text-[11px] text-ink-3 num h-[14px]">{clarifier.code} · state point</div>
      {v0 !== null && k !== null && x !== null && sor !== null && u !== null && slr !== null ? (
        <StatePointDiagram
          compact
          width={340}
          height={190}
          v0_mh={v0}
          k_Lg={k}
          mlss_gL={x}
          overflowRate_mh={sor}
          underflowRate_mh={u}
          solidsLoading_kgm2h={slr}
          requiredUnderflowConc_gL={sp.requiredUnderflowConc_gL.value}
          limitingFlux_kgm2h={sp.limitingFlux_kgm2h.value}
          limitingConc_gL={sp.limitingConc_gL.value}
          abnormal={negative(sp.thickeningMargin) || negative(sp.clarificationMargin)}
        />
      ) : (
        <p className="text-unavailable text-[12px] h-[40px]" data-testid="state-point-unavailable">
          ■ Diagram unavailable: {[...sp.settling.reasons, ...sp.overflowRate_mh.reasons, ...sp.feed.mlss_gL.reasons][0] ?? 'settling parameters or flows missing'}
        </p>
      )}
      <div className="grid grid-cols-2 gap-x-3">
        <FigureRow label="Overflow rate" f={sp.overflowRate_mh} digits={3} />
        <FigureRow label="Solids loading" f={sp.solidsLoading_kgm2h} digits={3} />
        <FigureRow label="Underflow rate" f={sp.underflowRate_mh} digits={3} />
        <FigureRow label="Limiting flux" f={sp.limitingFlux_kgm2h} digits={3} />
        <FigureRow label="Thickening margin" f={sp.thickeningMargin} percent />
        <FigureRow label="Clarification margin" f={sp.clarificationMargin} percent />
      </div>
      <SettlingSourceLine used={sp.settling} settling={settling} />
    </div>
  );
});
