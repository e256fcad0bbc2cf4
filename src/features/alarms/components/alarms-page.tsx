import type { SortingState } from '@tanstack/react-table';
import { useMemo, useState, type ReactNode } from 'react';
import { useForm } from 'react-hook-form';
import { ALARM_SHELVE_MAX_MIN, alarmShelveRequest } from '../../../../shared/contracts/alarm.ts';
import { OPERATOR_CAUTION } from '../../../../shared/contracts/balance.ts';
import type { AlarmOut } from '../../../../shared/contracts/plant-api.ts';
import { roleAtLeast } from '../../../../shared/contracts/roles.ts';
import { Button, ErrorNote, Field, FormProblem, Panel, Select, TextInput } from '../../../components/ui/controls.tsx';
import { DataTable, useDataTable, type ColumnDef } from '../../../components/ui/data-table.tsx';
import { PriorityMark } from '../../../components/ui/priority-mark.tsx';
import { SectionBoundary } from '../../../components/ui/section-boundary.tsx';
import { formatUtc, formatValue } from '../../../lib/format.ts';
import { applyServerErrors, contractResolver, fieldError, textOrNothing } from '../../../lib/form.ts';
import { useMe } from '../../auth/api/me.ts';
import { useCurrentPlant } from '../../plant/api/plants.ts';
import { useAckAlarm } from '../api/ack-alarm.ts';
import { useAlarms } from '../api/alarms.ts';
import { useShelveAlarm, useUnshelveAlarm, type AlarmShelveRequest } from '../api/shelve-alarm.ts';
import { useLiveAlarms } from '../hooks/use-live-alarms.ts';
import { AlarmRateStrip } from './alarm-rate-strip.tsx';

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
  // ISA-18.2 designed suppression and shelving: listed, not annunciated.
  if (a.state !== 'cleared' && a.suppressedReason) return { text: 'SUPPRESSED', strong: false };
  if (isShelved(a)) return { text: 'SHELVED', strong: false };
  if (a.state === 'raised') return { text: 'ACTIVE · UNACK', strong: true };
  if (a.state === 'acknowledged') return { text: 'ACTIVE · ACK', strong: false };
  return a.acknowledgedAt ? { text: 'CLEARED', strong: false } : { text: 'CLEARED · UNACK', strong: true };
}

/** Whether an alarm is on the shelf now (ISA-18.2 shelving: listed, not annunciated until the expiry). */
const isShelved = (a: AlarmOut) => a.state !== 'cleared' && a.shelvedUntil !== null && Date.parse(a.shelvedUntil) > Date.now();

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
      <AlarmRateStrip plantId={plantId} />
      <p className="text-[11px] text-ink-3 px-0.5">Alarms come from the advisory balance and the signal checks. {OPERATOR_CAUTION}</p>
      <SectionBoundary name="Active alarms">
        <Panel title="Active and unacknowledged">
          <ErrorNote error={raised.error ?? acked.error} />
          <AlarmTable alarms={active} plantId={plantId} canAck={canAck} empty="No active alarm." testid="active-alarms" shelving />
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

/** Value and limit in the rule's unit, or a pointer to the message for rules without one. */
function ValueLimit({ a }: { a: AlarmOut }) {
  const u = RULE_UNIT[a.rule];
  if (!u) return <span className="text-ink-3">see message</span>;
  return (
    <>
      {formatValue(a.value === null ? null : a.value * u.scale, 3)} / {formatValue(a.limit === null ? null : a.limit * u.scale, 3)} <span className="text-ink-3 text-[11px]">{u.unit}</span>
    </>
  );
}

function alarmColumns(history: boolean, ackCell: (a: AlarmOut) => ReactNode, shelfCell: ((a: AlarmOut) => ReactNode) | null): ColumnDef<AlarmOut>[] {
  return [
    {
      id: 'priority',
      header: 'Priority',
      accessorKey: 'priority',
      meta: { width: '76px' },
      cell: ({ row: { original: a } }) => (
        <span className="inline-flex items-center gap-1">
          <PriorityMark priority={a.priority} muted={!!a.acknowledgedAt} />
          <span className="num text-ink-2">P{a.priority}</span>
        </span>
      ),
    },
    { id: 'state', header: 'State', accessorFn: (a) => stateText(a).text, meta: { width: '136px' }, cell: ({ row: { original: a } }) => <span className={stateText(a).strong ? 'font-semibold text-ink' : 'text-ink-2'}>{stateText(a).text}</span> },
    { id: 'raisedAt', header: 'Raised (UTC)', accessorFn: (a) => Date.parse(a.raisedAt), meta: { width: '160px', cellClass: 'num' }, cell: ({ row: { original: a } }) => formatUtc(a.raisedAt) },
    ...(history
      ? [{ id: 'clearedAt', header: 'Cleared (UTC)', accessorFn: (a: AlarmOut) => (a.clearedAt ? Date.parse(a.clearedAt) : 0), meta: { width: '160px', cellClass: 'num' }, cell: ({ row: { original: a } }: { row: { original: AlarmOut } }) => formatUtc(a.clearedAt) }]
      : []),
    {
      id: 'rule',
      header: 'Rule · target',
      accessorFn: (a) => `${a.rule} ${a.target}`,
      meta: { width: '220px', cellClass: 'text-ink-2' },
      cell: ({ row: { original: a } }) => (
        <>
          {a.rule} · <span className="num">{a.target}</span>
        </>
      ),
    },
    {
      id: 'message',
      header: 'Message',
      accessorFn: (a) => plainMessage(a.message),
      enableSorting: false,
      meta: { cellClass: 'py-1 pr-2' },
      cell: ({ row: { original: a } }) => (
        <>
          {plainMessage(a.message)}
          {isShelved(a) && a.shelveReason ? (
            <span className="text-ink-3" data-testid="shelve-reason">
              {' '}
              Shelved: {a.shelveReason}
            </span>
          ) : null}
        </>
      ),
    },
    { id: 'value', header: 'Value / limit', enableSorting: false, meta: { width: '170px', align: 'right', cellClass: 'num whitespace-nowrap' }, cell: ({ row: { original: a } }) => <ValueLimit a={a} /> },
    { id: 'ack', header: 'Acknowledged', accessorFn: (a) => a.acknowledgedAt ?? '', meta: { width: '210px', align: 'right', cellClass: 'whitespace-nowrap pl-4' }, cell: ({ row: { original: a } }) => ackCell(a) },
    ...(shelfCell
      ? [{ id: 'shelf', header: 'Shelf', accessorFn: (a: AlarmOut) => (isShelved(a) ? Date.parse(a.shelvedUntil!) : 0), meta: { width: '320px', align: 'right' as const, cellClass: 'whitespace-nowrap pl-4' }, cell: ({ row: { original: a } }: { row: { original: AlarmOut } }) => shelfCell(a) }]
      : []),
  ];
}

/**
 * One alarm list (TanStack Table): ordered as given (by priority, then newest) until the operator
 * sorts by a column header.
 */
function AlarmTable({ alarms, plantId, canAck, empty, testid, history = false, shelving = false }: { alarms: AlarmOut[]; plantId: number; canAck: boolean; empty: string; testid: string; history?: boolean; shelving?: boolean }) {
  const ack = useAckAlarm(plantId);
  const unshelve = useUnshelveAlarm(plantId);
  const [pendingId, setPendingId] = useState<number | null>(null);
  const [shelveId, setShelveId] = useState<number | null>(null);
  const ackPending = ack.isPending ? pendingId : null;
  const unshelvePending = unshelve.isPending ? pendingId : null;
  const shelfCell = useMemo(
    () =>
      shelving
        ? (a: AlarmOut) => (
            <span className="inline-flex items-center gap-2">
              {isShelved(a) ? (
                <span className="text-ink-2">
                  until <span className="num">{formatUtc(a.shelvedUntil)}</span>
                </span>
              ) : null}
              {!canAck ? (
                isShelved(a) ? null : <span className="text-ink-3">—</span>
              ) : isShelved(a) ? (
                <Button
                  aria-label={`Unshelve ${a.rule} ${a.target}`}
                  disabled={unshelvePending === a.id}
                  onClick={() => {
                    setPendingId(a.id);
                    unshelve.mutate({ alarmId: a.id });
                  }}
                >
                  Unshelve
                </Button>
              ) : a.state !== 'cleared' ? (
                <Button aria-label={`Shelve ${a.rule} ${a.target}`} aria-expanded={shelveId === a.id} onClick={() => setShelveId(shelveId === a.id ? null : a.id)}>
                  Shelve…
                </Button>
              ) : (
                <span className="text-ink-3">—</span>
              )}
            </span>
          )
        : null,
    [shelving, canAck, unshelvePending, shelveId, unshelve.mutate],
  );
  const columns = useMemo(
    () =>
      alarmColumns(history, (a) =>
        a.acknowledgedAt ? (
          <span className="num text-ink-3">
            {formatUtc(a.acknowledgedAt)} · #{a.acknowledgedBy ?? '?'}
          </span>
        ) : canAck ? (
          <Button
            aria-label={`Acknowledge ${a.rule} ${a.target}`}
            disabled={ackPending === a.id}
            onClick={() => {
              setPendingId(a.id);
              ack.mutate({ alarmId: a.id });
            }}
          >
            Acknowledge
          </Button>
        ) : (
          <span className="text-ink-3">not acknowledged</span>
        ),
      shelfCell),
    [history, canAck, ackPending, ack.mutate, shelfCell],
  );
  const [sorting, setSorting] = useState<SortingState>([]);
  const table = useDataTable({ data: alarms, columns, getRowId: (a) => String(a.id), state: { sorting }, onSortingChange: setSorting });
  const shelveTarget = shelveId === null ? undefined : alarms.find((a) => a.id === shelveId && a.state !== 'cleared' && !isShelved(a));
  if (!alarms.length) return <p className="text-ink-3 text-[12px] py-1" data-testid={testid}>{empty}</p>;
  return (
    <>
      <ErrorNote error={ack.error ?? unshelve.error} />
      {shelveTarget && canAck ? <ShelveForm key={shelveTarget.id} plantId={plantId} alarm={shelveTarget} onDone={() => setShelveId(null)} /> : null}
      <DataTable table={table} label={history ? 'Alarm history' : 'Active alarms'} testId={testid} rowProps={(r) => ({ 'data-alarm-id': r.original.id, 'data-rule': r.original.rule, className: 'border-b border-edge/60 h-7 align-middle' })} />
    </>
  );
}

/** Shelf lengths offered, in minutes: up to one shift (the contract's maximum). */
const SHELVE_CHOICES = [15, 30, 60, 120, 240, ALARM_SHELVE_MAX_MIN];
const shelveLength = (min: number) => (min < 60 ? `${min} min` : `${min / 60} h`);

type ShelveValues = { reason: string; minutes: string };
const shelveResolver = contractResolver(alarmShelveRequest, (v: ShelveValues) => ({ reason: textOrNothing(v.reason), minutes: Number(v.minutes) }));

/**
 * Shelving one alarm (ISA-18.2): the operator gives a reason and a length; the alarm stays listed
 * but is not annunciated or mailed until the shelf expires on the server's clock, and comes back
 * by itself then if it is still active. Checked with the server's own contract before sending.
 */
function ShelveForm({ plantId, alarm, onDone }: { plantId: number; alarm: AlarmOut; onDone: () => void }) {
  const shelve = useShelveAlarm(plantId);
  const form = useForm<ShelveValues, unknown, AlarmShelveRequest>({ defaultValues: { reason: '', minutes: '60' }, resolver: shelveResolver });
  const { errors } = form.formState;
  const submit = form.handleSubmit((body) => shelve.mutate({ alarmId: alarm.id, body }, { onSuccess: onDone, onError: (e) => applyServerErrors(e, form) }));
  return (
    <form
      onSubmit={(e) => void submit(e)}
      noValidate
      aria-label="Shelve alarm"
      className="mb-2 flex flex-wrap items-end gap-3 border border-edge bg-panel-2 px-2 py-1.5"
    >
      <div className="flex flex-col text-[12px] min-w-[260px]">
        <span className="text-ink-2">Shelve</span>
        <span className="inline-flex items-center gap-1 h-7">
          <PriorityMark priority={alarm.priority} muted={!!alarm.acknowledgedAt} />
          <span className="font-semibold">
            {alarm.rule} · <span className="num">{alarm.target}</span>
          </span>
        </span>
      </div>
      <div className="w-[420px]">
        <Field label="Reason" error={fieldError(errors, 'reason')}>
          <TextInput {...form.register('reason')} maxLength={500} placeholder="why it need not be annunciated now" aria-invalid={errors.reason ? true : undefined} autoFocus />
        </Field>
      </div>
      <Field label="For" error={fieldError(errors, 'minutes')}>
        <Select {...form.register('minutes')}>
          {SHELVE_CHOICES.map((m) => (
            <option key={m} value={String(m)}>
              {shelveLength(m)}
            </option>
          ))}
        </Select>
      </Field>
      <div className="flex gap-1 pb-px">
        <Button kind="primary" type="submit" disabled={shelve.isPending}>
          {shelve.isPending ? 'Shelving…' : 'Shelve'}
        </Button>
        <Button kind="quiet" onClick={onDone}>
          Cancel
        </Button>
      </div>
      <p className="basis-full text-[11px] text-ink-3">
        Listed but not annunciated or mailed until the shelf runs out; an alarm still active then is annunciated again. Recorded in the audit log with your name and reason.
      </p>
      <FormProblem error={shelve.error} root={errors.root?.server?.message} />
    </form>
  );
}
