import { useState } from 'react';
import { roleAtLeast } from '../../../../shared/contracts/roles.ts';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { useMe } from '../../auth/api/me.ts';
import { useCurrentPlant } from '../../plant/api/plants.ts';
import { PlantPicker } from '../../signals/components/plant-picker.tsx';
import { useSources } from '../api/sources.ts';
import { ExplorePanel, type TagDraft } from './explore-panel.tsx';
import { SourcesPanel } from './sources-panel.tsx';
import { TagForm } from './tag-form.tsx';
import { TagImportPanel } from './tag-import-panel.tsx';
import { HistoryImportPanel } from './history-import-panel.tsx';
import { TagsTable } from './tags-table.tsx';

/** Wiring (integrator+): sources and their connections, what they offer, tags and their process signals. */
export default function WiringPage() {
  const { plantId, plants, setPlantId } = useCurrentPlant();
  const me = useMe();
  // The server refuses every wiring route below integrator; say so instead of a page of 403s.
  if (me.data && !roleAtLeast(me.data.role, 'integrator')) return <p className="p-2 text-ink-2">Wiring needs the integrator role (you are {me.data.role}).</p>;
  return (
    <div className="flex flex-col gap-2">
      <div className="flex items-center gap-3">
        <h1 className="text-[15px] font-semibold">Wiring</h1>
        <PlantPicker plants={plants} plantId={plantId} onChange={setPlantId} />
        <span className="text-[12px] text-ink-3">Flocstream only reads from the plant; nothing here writes to a PLC or SCADA tag.</span>
      </div>
      {plantId === null ? <p className="text-ink-3">No plant to wire.</p> : <WiringView key={plantId} plantId={plantId} />}
    </div>
  );
}

function WiringView({ plantId }: { plantId: number }) {
  const sources = useSources(plantId);
  const [selected, setSelected] = useState<number | null>(null);
  const [draft, setDraft] = useState<TagDraft | null>(null);
  const source = sources.data?.find((s) => s.id === selected);
  return (
    <div className="grid grid-cols-1 2xl:grid-cols-2 gap-2">
      <SectionBoundary name="Sources">
        <SourcesPanel plantId={plantId} selected={selected} onSelect={setSelected} />
      </SectionBoundary>
      <SectionBoundary name="Explore">
        <ExplorePanel source={source} onPick={setDraft} />
      </SectionBoundary>
      <div className="2xl:col-span-2">
        <SectionBoundary name="New tag">
          <TagForm plantId={plantId} sources={sources.data ?? []} draft={draft} onDone={() => setDraft(null)} />
        </SectionBoundary>
      </div>
      <div className="2xl:col-span-2">
        <SectionBoundary name="Tags">
          <TagsTable plantId={plantId} />
        </SectionBoundary>
      </div>
      <div className="2xl:col-span-2">
        <SectionBoundary name="Tag import">
          <TagImportPanel plantId={plantId} />
        </SectionBoundary>
      </div>
      <div className="2xl:col-span-2">
        <SectionBoundary name="History import">
          <HistoryImportPanel plantId={plantId} />
        </SectionBoundary>
      </div>
    </div>
  );
}
