import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { SettlerPanel } from './settler-panel.tsx';
import { SrtPanel } from './srt-panel.tsx';
import { StatePointPanel } from './state-point-panel.tsx';
import { StormPanel } from './storm-panel.tsx';
import { SviPanel } from './svi-panel.tsx';

/**
 * What-if calculators (design §6): storm projection, state point analysis, layered settler,
 * sludge age and settleability, each posting to its stateless `/api/v1/calc/*` endpoint.
 */
export default function WhatIfPage() {
  return (
    <div className="flex flex-col gap-2 min-w-[1200px] max-w-[1880px]">
      <header className="flex items-baseline gap-3 px-0.5">
        <h1 className="text-[15px] font-semibold">What-if calculators</h1>
        <p className="text-[12px] text-ink-3">
          Pre-filled with example values of an invented plant, not yours — edit them freely, or take the plant's inputs from its latest balance with “Fill from live plant”.
        </p>
      </header>
      <div className="grid grid-cols-12 gap-2 items-start">
        <div className="col-span-5">
          <SectionBoundary name="Storm projection">
            <StormPanel />
          </SectionBoundary>
        </div>
        <div className="col-span-7">
          <SectionBoundary name="State point analysis">
            <StatePointPanel />
          </SectionBoundary>
        </div>
        <div className="col-span-5">
          <SectionBoundary name="Layered settler">
            <SettlerPanel />
          </SectionBoundary>
        </div>
        <div className="col-span-4">
          <SectionBoundary name="Sludge age">
            <SrtPanel />
          </SectionBoundary>
        </div>
        <div className="col-span-3">
          <SectionBoundary name="Settleability index">
            <SviPanel />
          </SectionBoundary>
        </div>
      </div>
    </div>
  );
}
