import { useMemo, useState } from 'react';
import { OPERATOR_CAUTION } from '../../../../shared/contracts/balance.ts';
import type { AlarmOut } from '../../../../shared/contracts/plant-api.ts';
import { roleAtLeast } from '../../../../shared/contracts/roles.ts';
import { Button, ErrorNote, Panel } from '../../../components/ui/controls.tsx';
import { PriorityMark } from '../../../components/ui/priority-mark.tsx';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { formatUtc, formatValue } from '../../../lib/format.ts';
import { useMe } from '../../auth/api/me.ts';
import { useCurrentPlant } from '../../plant/api/plants.ts';
import { useAckAlarm } from '../api/ack-alarm.ts';
import { useAlarms } from '../api/alarms.ts';
import { useLiveAlarms } from '../hooks/use-live-alarms.ts';

/** Value and limit of each rule in the unit people read them in (fractions as per cent). */
const RULE_UNIT: Record<string, { unit: string; scale: number } | null> = {
  'ingest-down': { unit: 's', scale: 1 },
  'tag-stale': { unit: 's', scale: 1 },
  'tag-bad': null,
  'mlss-low': { unit: 'g/L', scale: 1 },
  'stored-fraction-high': { unit: '%', scale: 100 },
  'blanket-high': { unit: 'm', scale: 1 },
  'blanket-rising': { unit: 'm/h', scale: 1 },
  'ras-concentration-margin-low': { unit: '%', scale: 100 },
  'ras-pump-margin-low': { unit: '%', scale: 100 },
  'srt-off-target': { unit: '% off', scale: 100 },
};

/** ISA-18.2 states in words: unacknowledged active, acknowledged active, returned to normal unacknowledged, cleared. */
function stateText(a: AlarmOut): { text: string; strong: boolean } {
  if (a.state === 'raised') return { text: 'ACTIVE · UNACK', strong: true };
  if (a.state === 'acknowledged') return { text: 'ACTIVE · ACK', strong: false };
  return a.acknowledgedAt ? { text: 'CLEARED', strong: false } : { text: 'CLEARED · UNACK', strong: true };
}

/** The message without the advisory sentence the server appends to each (shown once above the table). */
const plainMessage = (m: string) => m.replace(` ${OPERATOR_CAUTION}`, '').replace(OPERATOR_CAUTION, '').trim();

/**
 * One row per alarm: the three state queries refetch one after another, so for a moment an alarm
 * just acknowledged is both in the (stale) raised list and the (fresh) acknowledged list. States
 * only move forward (raised → acknowledged → cleared, ack at most once), so keep the furthest.
 */
function newestState(list: AlarmOut[]): Map<number, AlarmOut> {
  const rank = (a: AlarmOut) => ({ raised: 0, acknowledged: 1, cleared: 2 })[a.state] * 2 + (a.acknowledgedAt ? 1 : 0);
  const out = new Map<number, AlarmOut>();
  for (const a of list) {
    const seen = out.get(a.id);
    if (!seen || rank(a) > rank(seen)) out.set(a.id, a);
  }
  return out;
}

const byPriorityThenNewest = (x: AlarmOut, y: AlarmOut) => x.priority - y.priority || Date.parse(y.raisedAt) - Date.parse(x.raisedAt);

/**
 * Alarms (design §6; ISA-18.2 spirit): the active list first — unacknowledged, acknowledged, and
 * cleared alarms still waiting for an acknowledge — by priority, then the cleared history.
 * Priority reads by shape, colour and number (PriorityMark). Live from the plant stream.
 */
export default function AlarmsPage() {
  const { plantId, isPending } = useCurrentPlant();
  const me = useMe();
  const canAck = me.data ? roleAtLeast(me.data.role, 'operator') : false;
  const raised = useAlarms(plantId, 'raised');
  const acked = useAlarms(plantId, 'acknowledged');
  const cleared = useAlarms(plantId, 'cleared');
  const stream = useLiveAlarms(plantId);

  const active = useMemo(
    () => [...newestState([...(raised.data?.alarms ?? []), ...(acked.data?.alarms ?? []), ...(cleared.data?.alarms ?? [])]).values()].filter((a) => a.state !== 'cleared' || !a.acknowledgedAt).sort(byPriorityThenNewest),
    [raised.data, acked.data, cleared.data],
  );

  if (isPending) return <p className="p-2 text-ink-3">Loading plants…</p>;
  if (plantId === null) return <p className="p-2">No plant is configured yet.</p>;
  const unack = active.filter((a) => !a.acknowledgedAt).length;
  return (
    <div className="flex flex-col gap-2 min-w-[1200px] max-w-[1900px]">
      <header className="flex items-baseline gap-3 px-0.5 h-8">
        <h1 className="text-[15px] font-semibold">Alarms</h1>
        <span className="text-ink-2 text-[12px]" data-testid="alarm-counts">
          <span className="num">{active.length}</span> needing attention · <span className="num">{unack}</span> unacknowledged
        </span>
        <span className={`ml-auto text-[12px] ${stream === 'down' ? 'text-alarm-2 font-semibold' : 'text-ink-3'}`}>{stream === 'live' ? '● live' : stream === 'down' ? '▲ stream down — polling every 60 s' : '○ connecting…'}</span>
      </header>
      <p className="text-[11px] text-ink-3 px-0.5">Alarms come from the advisory balance and the signal checks. {OPERATOR_CAUTION}</p>
      <SectionBoundary name="Active alarms">
        <Panel title="Active and unacknowledged">
          <ErrorNote error={raised.error ?? acked.error} />
          <AlarmTable alarms={active} plantId={plantId} canAck={canAck} empty="No active alarm." testid="active-alarms" />
        </Panel>
      </SectionBoundary>
      <SectionBoundary name="Alarm history">
        <Panel title="History (cleared, newest first)">
          <ErrorNote error={cleared.error} />
          <AlarmTable alarms={cleared.data?.alarms ?? []} plantId={plantId} canAck={false} empty="No cleared alarm yet." testid="alarm-history" history />
        </Panel>
      </SectionBoundary>
    </div>
  );
}

function AlarmTable({ alarms, plantId, canAck, empty, testid, history = false }: { alarms: AlarmOut[]; plantId: number; canAck: boolean; empty: string; testid: string; history?: boolean }) {
  const ack = useAckAlarm(plantId);
  const [pendingId, setPendingId] = useState<number | null>(null);
  if (!alarms.length) return <p className="text-ink-3 text-[12px] py-1" data-testid={testid}>{empty}</p>;
  return (
    <>
      <ErrorNote error={ack.error} />
      <table className="w-full text-[12px] border-collapse" data-testid={testid}>
        <thead>
          <tr className="text-left text-ink-3 border-b border-edge h-6">
            <th className="w-[64px] font-normal">Priority</th>
            <th className="w-[128px] font-normal">State</th>
            <th className="w-[150px] font-normal">Raised (UTC)</th>
            {history ? <th className="w-[150px] font-normal">Cleared (UTC)</th> : null}
            <th className="w-[200px] font-normal">Rule · target</th>
            <th className="font-normal">Message</th>
            <th className="w-[160px] font-normal text-right">Value / limit</th>
            <th className="w-[190px] font-normal text-right pl-4">Acknowledged</th>
          </tr>
        </thead>
        <tbody>
          {alarms.map((a) => {
            const st = stateText(a);
            const u = RULE_UNIT[a.rule];
            return (
              <tr key={a.id} className="border-b border-edge/60 h-7 align-middle" data-alarm-id={a.id} data-rule={a.rule}>
                <td>
                  <span className="inline-flex items-center gap-1">
                    <PriorityMark priority={a.priority} muted={!!a.acknowledgedAt} />
                    <span className="num text-ink-2">P{a.priority}</span>
                  </span>
                </td>
                <td className={st.strong ? 'font-semibold text-ink' : 'text-ink-2'}>{st.text}</td>
                <td className="num">{formatUtc(a.raisedAt)}</td>
                {history ? <td className="num">{formatUtc(a.clearedAt)}</td> : null}
                <td className="text-ink-2">
                  {a.rule} · <span className="num">{a.target}</span>
                </td>
                <td className="py-1 pr-2">{plainMessage(a.message)}</td>
                <td className="num text-right whitespace-nowrap">
                  {u ? (
                    <>
                      {formatValue(a.value === null ? null : a.value * u.scale, 3)} / {formatValue(a.limit === null ? null : a.limit * u.scale, 3)} <span className="text-ink-3 text-[11px]">{u.unit}</span>
                    </>
                  ) : (
                    <span className="text-ink-3">see message</span>
                  )}
                </td>
                <td className="text-right whitespace-nowrap pl-4">
                  {a.acknowledgedAt ? (
                    <span className="num text-ink-3">
                      {formatUtc(a.acknowledgedAt)} · #{a.acknowledgedBy ?? '?'}
                    </span>
                  ) : canAck ? (
                    <Button
                      aria-label={`Acknowledge ${a.rule} ${a.target}`}
                      disabled={ack.isPending && pendingId === a.id}
                      onClick={() => {
                        setPendingId(a.id);
                        ack.mutate({ alarmId: a.id });
                      }}
                    >
                      Acknowledge
                    </Button>
                  ) : (
                    <span className="text-ink-3">not acknowledged</span>
                  )}
                </td>
              </tr>
            );
          })}
        </tbody>
      </table>
    </>
  );
}
