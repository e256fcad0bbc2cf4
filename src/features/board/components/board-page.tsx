import { useMemo } from 'react';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { ErrorNote, Select } from '../../../components/ui/controls.tsx';
import { formatAge, formatUtc } from '../../../lib/format.ts';
import type { StreamState } from '../../../lib/stream.ts';
import { useCurrentPlant, usePlantLayout } from '../../plant/api/plants.ts';
import { UnitSystemContext } from '../unit-display.ts';
import { useAlarms } from '../../alarms/api/alarms.ts';
import { useBalanceLive } from '../api/balance-live.ts';
import { trainTrendTags } from '../figures.ts';
import { AlarmIndex, alarmKey } from '../hooks/alarm-index.ts';
import { BalanceClock, useBalanceAge } from '../hooks/balance-clock.ts';
import { useLiveBalance } from '../hooks/use-live-balance.ts';
import { BasisPanel, PlantInventory, SrtPanel } from './plant-panels.tsx';
import { TrainPanel } from './train-panel.tsx';

/**
 * Plant board (design §6): the live solids balance per train — where the sludge is, whether the
 * RAS system can hold it, what the storm at peak flow would do, and the sludge age the wasting
 * produces. Live from the plant stream; each panel is memoised and sized so figures never shift.
 */
export default function BoardPage() {
  const { plantId, plants, setPlantId, isPending } = useCurrentPlant();
  const live = useBalanceLive(plantId);
  const layout = usePlantLayout(plantId);
  const stream = useLiveBalance(plantId);
  const raised = useAlarms(plantId, 'raised');
  const acked = useAlarms(plantId, 'acknowledged');
  const alarmIndex = useMemo(() => new Map([...(acked.data?.alarms ?? []), ...(raised.data?.alarms ?? [])].map((a) => [alarmKey(a.rule, a.target), a])), [raised.data, acked.data]);
  const b = live.data?.balance ?? null;
  const data = b?.data;
  const computedAt = live.data && b ? live.data.receivedAt - (live.data.age_s ?? 0) * 1000 : null;

  const trainNames = useMemo(() => new Map((layout.data?.trains ?? []).map((t) => [t.code, t.name])), [layout.data]);
  const signals = b?.inputs.signals;
  // "Trend inputs" of each train: its mapped tags over the last 24 h on the Trends view.
  const trendLinks = useMemo(() => {
    const m = new Map<string, string>();
    for (const t of layout.data?.trains ?? []) {
      const ids = trainTrendTags(t, signals ?? []);
      if (ids.length) m.set(t.code, `/trends?tags=${ids.join(',')}&range=24h`);
    }
    return m;
  }, [layout.data, signals]);
  const perTrain = useMemo(() => {
    const m = new Map<string, { basins: NonNullable<typeof data>['basins']; clarifiers: NonNullable<typeof data>['clarifiers'] }>();
    for (const t of data?.trains ?? []) m.set(t.code, { basins: (data?.basins ?? []).filter((x) => x.train === t.code), clarifiers: (data?.clarifiers ?? []).filter((x) => x.train === t.code) });
    return m;
  }, [data?.trains, data?.basins, data?.clarifiers]);

  if (isPending) return <p className="p-2 text-ink-3">Loading plants…</p>;
  if (plantId === null) return <p className="p-2">No plant is configured yet, or your account may not see any. An integrator adds plants under Wiring.</p>;
  const plantName = plants.find((p) => p.id === plantId)?.name ?? `plant ${plantId}`;
  const storedLimit = data?.trains[0]?.storm.checks.find((c) => c.rule === 'max-stored-fraction')?.limit ?? null;

  return (
    <BalanceClock.Provider value={computedAt}>
      <AlarmIndex.Provider value={alarmIndex}>
      <UnitSystemContext.Provider value={plants.find((p) => p.id === plantId)?.unitSystem ?? 'SI'}>
      <div className="flex flex-col gap-2 min-w-[1240px] max-w-[1900px]">
        <header className="flex items-center gap-3 px-0.5 h-8">
          <h1 className="text-[15px] font-semibold">Plant board</h1>
          {plants.length > 1 ? (
            <Select aria-label="Plant" value={plantId} onChange={(e) => setPlantId(Number(e.target.value))}>
              {plants.map((p) => (
                <option key={p.id} value={p.id}>
                  {p.name}
                </option>
              ))}
            </Select>
          ) : (
            <span className="text-ink-2">{plantName}</span>
          )}
          <BalanceStamp ts={b?.ts ?? null} quality={b?.quality ?? null} stream={stream} />
        </header>
        {live.error ? <ErrorNote error={live.error} /> : null}
        {live.isPending ? <p className="p-2 text-ink-3">Loading the balance…</p> : null}
        {live.data && !b ? (
          <section className="bg-panel border border-edge rounded-sm p-3" aria-label="No balance" data-testid="no-balance">
            <h2 className="font-semibold">No solids balance to show yet</h2>
            <p className="text-ink-2 mt-1">The server says: {live.data.reason ?? 'no reason given'}.</p>
            <p className="text-ink-3 mt-1 text-[12px]">
              The balance engine computes one every few seconds once the plant's signals arrive; check Signals for stale or missing tags. This view updates by itself.
            </p>
          </section>
        ) : null}
        {data ? (
          <>
            <div className="grid grid-cols-2 min-[1700px]:grid-cols-[minmax(0,5fr)_minmax(0,6fr)_minmax(0,3fr)] gap-2 items-stretch">
              <SectionBoundary name="Plant inventory">
                <PlantInventory inv={data.inventory} storedLimit={storedLimit} />
              </SectionBoundary>
              <div className="row-span-2 min-[1700px]:row-span-1">
                <SectionBoundary name="Sludge age">
                  <SrtPanel srt={data.srt} />
                </SectionBoundary>
              </div>
              <SectionBoundary name="Basis">
                <BasisPanel settle={data.settleability} storm={data.storm} settling={data.settling} />
              </SectionBoundary>
            </div>
            <div className="grid grid-cols-1 min-[1700px]:grid-cols-2 gap-2 items-start">
              {data.trains.map((t) => (
                <SectionBoundary key={t.code} name={`Train ${t.code}`}>
                  <TrainPanel
                    train={t}
                    name={trainNames.get(t.code) ?? `Train ${t.code}`}
                    basins={perTrain.get(t.code)?.basins ?? []}
                    clarifiers={perTrain.get(t.code)?.clarifiers ?? []}
                    peakFlowSource={data.storm.source === 'plant' ? 'plant peak' : data.storm.source === 'setting' ? 'setting' : 'not set'}
                    settling={data.settling}
                    trendLink={trendLinks.get(t.code) ?? null}
                  />
                </SectionBoundary>
              ))}
            </div>
          </>
        ) : null}
      </div>
      </UnitSystemContext.Provider>
      </AlarmIndex.Provider>
    </BalanceClock.Provider>
  );
}

const STREAM_TEXT: Record<StreamState, string> = { live: 'live', connecting: 'connecting…', down: 'stream down — polling every 60 s' };

/** Time, age and overall quality of the shown balance and the stream state; ticks on its own. */
function BalanceStamp({ ts, quality, stream }: { ts: string | null; quality: string | null; stream: StreamState }) {
  const age = useBalanceAge();
  const old = age !== null && age > 120;
  return (
    <div className="ml-auto flex items-center gap-3 text-[12px]" data-testid="balance-stamp">
      <span className="text-ink-3">
        Balance <span className="num text-ink">{formatUtc(ts)}</span>
      </span>
      <span className={old ? 'px-1 border border-alarm-2 text-alarm-2 font-semibold' : 'text-ink-3'}>
        {old ? 'OLD · ' : ''}age <span className="num inline-block w-[52px] text-right">{formatAge(age)}</span>
      </span>
      {quality ? (
        <span className="text-ink-3">
          quality <span className={quality === 'good' ? 'text-ink' : 'text-estimated font-semibold'}>{quality}</span>
        </span>
      ) : null}
      <span className={stream === 'down' ? 'text-alarm-2 font-semibold' : 'text-ink-3'} data-testid="stream-state">
        {stream === 'live' ? '● ' : stream === 'down' ? '▲ ' : '○ '}
        {STREAM_TEXT[stream]}
      </span>
    </div>
  );
}
