import { memo, type ReactNode } from 'react';
import { Link } from 'react-router';
import type { BalanceData } from '../../../../shared/contracts/balance.ts';
import { sumFigures, withUnit } from '../../../../shared/domain/quality.ts';
import { FigureValue } from '../../../components/ui/figure.tsx';
import { formatValue } from '../../../lib/format.ts';
import { qualityNotes } from '../figures.ts';
import { Caution } from './caution.tsx';
import { ClarifierSection, MassSplitBar } from './inventory-picture.tsx';
import { FigureRow, Row } from './live-figure.tsx';
import { ClarifierStatePoint } from './clarifier-state-point.tsx';
import { StormChecks } from './storm-checks.tsx';
import { StormTimeline } from './storm-timeline.tsx';

type Train = BalanceData['trains'][number];
type Basin = BalanceData['basins'][number];
type Clarifier = BalanceData['clarifiers'][number];

function Group({ title, children, testid }: { title: string; children: ReactNode; testid?: string }) {
  return (
    <section className="border-t border-edge pt-1 mt-1.5" aria-label={title} data-testid={testid}>
      <h3 className="text-[11px] font-semibold uppercase tracking-wide text-ink-3 h-[16px]">{title}</h3>
      {children}
    </section>
  );
}

/**
 * One train of the board: the solids picture (mass split, clarifier cross-sections), the process
 * flows, the blankets, the RAS margins and the storm projection at the plant's peak flow. Memoised:
 * with structural sharing an unchanged train keeps its props and skips the re-render.
 */
type TrainPanelProps = {
  train: Train;
  name: string;
  basins: Basin[];
  clarifiers: Clarifier[];
  peakFlowSource: string;
  settling: BalanceData['settling'];
  /** The Trends view with this train's mapped signals; null when none is mapped. */
  trendLink: string | null;
};

/** Basins and clarifiers arrive as freshly filtered arrays; their elements keep identity under structural sharing, so compare element-wise. */
const sameItems = <T,>(a: T[], b: T[]) => a.length === b.length && a.every((x, i) => x === b[i]);
const samePanel = (p: TrainPanelProps, q: TrainPanelProps) =>
  p.train === q.train && p.name === q.name && p.peakFlowSource === q.peakFlowSource && p.settling === q.settling && p.trendLink === q.trendLink && sameItems(p.basins, q.basins) && sameItems(p.clarifiers, q.clarifiers);

export const TrainPanel = memo(function TrainPanel({ train, name, basins, clarifiers, peakFlowSource, settling, trendLink }: TrainPanelProps) {
  const inService = clarifiers.filter((c) => c.sideWaterDepth_m > 0);
  const depth_m = inService.length ? Math.min(...inService.map((c) => c.sideWaterDepth_m)) : null;
  const basinMass = withUnit(sumFigures(basins.map((b) => b.mass_kg), 'basins'), 'kg');
  const clarMass = withUnit(sumFigures(clarifiers.map((c) => c.blanketMass_kg), 'clarifiers'), 'kg');
  const stored = train.storm.checks.find((c) => c.rule === 'max-stored-fraction');
  const notes = qualityNotes([
    train.influentFlow_m3h, train.rasFlow_m3h, train.wasFlow_m3h, train.mlss_gL,
    ...Object.values(train.ras), train.storm.stormFlow_m3h, train.storm.equilibriumMlss_gL, train.storm.blanketRise_m,
    ...clarifiers.flatMap((c) => [c.blanketLevel_m, c.blanketRate_m_h, c.blanketMass_kg]),
    ...basins.map((b) => b.mlss_gL),
  ]);
  return (
    <article className="bg-panel border border-edge rounded-sm flex flex-col" aria-label={`Train ${train.code}`} data-testid={`train-${train.code}`}>
      <header className="flex items-center justify-between px-2 h-7 border-b border-edge bg-panel-2">
        <h2 className="text-[12px] font-semibold uppercase tracking-wide text-ink-2">
          {name} <span className="num text-ink-3 normal-case">({train.code})</span>
        </h2>
        <span className="text-[11px] text-ink-3">
          {basins.length} basin{basins.length === 1 ? '' : 's'} · {clarifiers.length} clarifier{clarifiers.length === 1 ? '' : 's'}
          {trendLink ? (
            <>
              {' · '}
              <Link to={trendLink} className="text-ink-2 underline-offset-2 hover:underline" title="This train's mapped signals on the Trends view, last 24 h">
                Trend inputs
              </Link>
            </>
          ) : null}
        </span>
      </header>
      <div className="p-2 grid grid-cols-[minmax(300px,1fr)_minmax(330px,1fr)] gap-x-4">
        <div>
          <Group title="Solids inventory" testid="inventory">
            <MassSplitBar basin={basinMass} clarifier={clarMass} limitFraction={stored?.limit ?? null} limitLabel="storm storage limit" />
            <div className="grid grid-cols-2 gap-x-3 mt-1">
              <FigureRow label="In basins" f={basinMass} digits={4} />
              <FigureRow label="In blankets" f={clarMass} digits={4} />
            </div>
          </Group>
          <Group title="Clarifiers — blanket against depth">
            <div className={`grid gap-2 ${clarifiers.length > 1 ? 'grid-cols-2' : 'grid-cols-1'}`}>
              {clarifiers.map((c) => (
                <div key={c.code} data-testid={`clarifier-${c.code}`}>
                  <div className="text-[11px] text-ink-3 num h-[14px]">
                    {c.code} · {formatValue(c.area_m2, 4)} m²
                  </div>
                  <ClarifierSection code={c.code} depth_m={c.sideWaterDepth_m} level={c.blanketLevel_m} rise_m={train.storm.blanketRise_m} rate={c.blanketRate_m_h} />
                  <FigureRow label="Blanket level" f={c.blanketLevel_m} watch={{ rule: 'blanket-high', target: c.code, word: 'HIGH' }} />
                  <FigureRow label="Rise rate" f={c.blanketRate_m_h} digits={2} round={2} watch={{ rule: 'blanket-rising', target: c.code, word: 'RISING' }} />
                  <FigureRow label="Underflow TSS" f={c.underflowTss_gL} />
                  <FigureRow label="Blanket mass" f={c.blanketMass_kg} digits={4} />
                </div>
              ))}
            </div>
          </Group>
        </div>
        <div>
          <Group title="Process" testid="process">
            <FigureRow label="Influent flow" f={train.influentFlow_m3h} digits={4} />
            {basins.length === 1 ? (
              <FigureRow label="MLSS" f={train.mlss_gL} watch={{ rule: 'mlss-low', target: basins[0]!.code, word: 'LOW' }} />
            ) : (
              basins.map((b) => <FigureRow key={b.code} label={`MLSS ${b.code}`} f={b.mlss_gL} watch={{ rule: 'mlss-low', target: b.code, word: 'LOW' }} />)
            )}
            <FigureRow label="RAS flow" f={train.rasFlow_m3h} digits={4} />
            <FigureRow label="WAS flow" f={train.wasFlow_m3h} />
          </Group>
          <Group title="RAS margins" testid="ras">
            <FigureRow label="X_R,max from SVI" f={train.ras.rasConcMaxRule_gL} />
            <FigureRow label="X_R,max by flux theory" f={train.ras.rasConcMaxFlux_gL} />
            <FigureRow label="X_R,max used (the lower)" f={train.ras.rasConcMax_gL} />
            <FigureRow label="X_R required now" f={train.ras.requiredRasConc_gL} />
            <FigureRow label="Concentration margin" f={train.ras.concentrationMargin} percent watch={{ rule: 'ras-concentration-margin-low', target: train.code, word: 'LOW' }} />
            <FigureRow label="Influent flow at zero margin" f={train.ras.concentrationLimitFlow_m3h} digits={4} />
            <FigureRow label="Minimum RAS flow" f={train.ras.minRasFlow_m3h} digits={4} />
            <Row label="RAS pump capacity (installed)">
              <FigureValue value={train.rasPumpCapacity_m3h} unit="m3/h" digits={4} label="installed capacity (plant layout)" />
            </Row>
            <FigureRow label="Pump margin" f={train.ras.pumpMargin} percent watch={{ rule: 'ras-pump-margin-low', target: train.code, word: 'LOW' }} />
            <FigureRow label="Influent flow at pump limit" f={train.ras.pumpLimitFlow_m3h} digits={4} />
            <Caution />
          </Group>
          <Group title="Design storm in time" testid="storm-time">
            <StormTimeline timeline={train.storm.timeline} depth_m={depth_m} rasFlow_m3h={train.rasFlow_m3h.value} />
          </Group>
          <Group title="Storm at peak flow — equilibrium" testid="storm">
            <FigureRow label={`Storm flow (${peakFlowSource})`} f={train.storm.stormFlow_m3h} digits={4} />
            <FigureRow label="MLSS at storm equilibrium" f={train.storm.equilibriumMlss_gL} />
            <FigureRow label="Sludge moved to clarifiers" f={train.storm.sludgeToClarifiers_kg} digits={4} />
            <FigureRow label="Blanket rise" f={train.storm.blanketRise_m} />
            <FigureRow label="Stored in clarifiers after" f={train.storm.storedFraction} percent />
            <div className="mt-1">
              <StormChecks checks={train.storm.checks} />
            </div>
            <Caution />
          </Group>
        </div>
        <div className="col-span-2">
          <Group title="State point — solids flux per clarifier" testid="state-points">
            <div className="flex flex-wrap gap-x-4 gap-y-2">
              {clarifiers.map((c) => (
                <ClarifierStatePoint key={c.code} clarifier={c} settling={settling} />
              ))}
            </div>
          </Group>
        </div>
      </div>
      {notes.length ? (
        <footer className="px-2 py-1 border-t border-edge text-[11px] text-estimated" data-testid="quality-notes">
          <span className="font-semibold">Quality: </span>
          {notes.slice(0, 4).join(' · ')}
          {notes.length > 4 ? ` · +${notes.length - 4} more (hover a figure)` : ''}
        </footer>
      ) : null}
    </article>
  );
}, samePanel);
