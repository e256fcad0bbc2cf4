import { useState } from 'react';
import { useForm, useWatch } from 'react-hook-form';
import { OPCUA_SECURITY_MODES, OPCUA_SECURITY_POLICIES, sourceCreate, sparkplugStatus, type ConnectionTestOut, type IngestStatusOut, type IngestWorkerOut, type MqttPayloadFormat, type SourceCreate, type SourceKind } from '../../../../shared/contracts/wiring.ts';
import { Button, ErrorNote, Field, FormProblem, Panel, Select, TextInput } from '../../../components/ui/controls.tsx';
import { applyServerErrors, contractResolver, fieldError } from '../../../lib/form.ts';
import { formatAge, formatUtc } from '../../../lib/format.ts';
import { useIngestStatus } from '../api/ingest-status.ts';
import { useTestSource } from '../api/source-test.ts';
import { useCreateSource, useSources } from '../api/sources.ts';

const th = 'text-left font-semibold text-ink-2 px-1.5 py-1 border-b border-edge';
const td = 'px-1.5 py-1 border-b border-edge/50 align-top';

/** Sources with their connector state from ingest, a connection test each, and the form for a new one. */
export function SourcesPanel({ plantId, selected, onSelect }: { plantId: number; selected: number | null; onSelect(id: number): void }) {
  const sources = useSources(plantId);
  const status = useIngestStatus();
  const test = useTestSource();
  const [results, setResults] = useState<Record<number, ConnectionTestOut | { error: string; ok: false; latency_ms: number }>>({});
  const runTest = (id: number) =>
    test.mutate(id, {
      onSuccess: (r) => setResults((m) => ({ ...m, [id]: r })),
      onError: (e) => setResults((m) => ({ ...m, [id]: { ok: false, latency_ms: 0, error: e.message } })),
    });
  const connector = (id: number) => status.data?.sources.find((s) => s.sourceId === id);
  return (
    <Panel title="Sources" actions={<IngestBadge running={status.data?.running} reason={status.data?.reason} />}>
      <ErrorNote error={sources.error} />
      <table className="w-full text-[12px]" aria-label="Sources">
        <thead>
          <tr>
            <th className={th}>Name</th>
            <th className={th}>Kind</th>
            <th className={th}>URL</th>
            <th className={`${th} text-right`}>Tags</th>
            <th className={th}>Ingest</th>
            <th className={th}>
              <span className="sr-only">Actions</span>
            </th>
          </tr>
        </thead>
        <tbody>
          {(sources.data ?? []).map((s) => {
            const c = connector(s.id);
            const r = results[s.id];
            const abnormal = c && c.state !== 'connected';
            return (
              <tr key={s.id} className={selected === s.id ? 'bg-white' : ''} data-testid="source-row" data-source-id={s.id}>
                <td className={td}>
                  {s.name}
                  {!s.enabled ? <span className="ml-1 text-ink-3">(disabled)</span> : null}
                </td>
                <td className={td}>{s.kind === 'opcua' ? 'OPC UA' : 'MQTT'}</td>
                <td className={`${td} num`}>
                  {/* A long URL may break anywhere; the notes after it only between words. */}
                  <span className="break-all">{s.url}</span>
                  {s.username ? <span className="text-ink-3 break-words"> as {s.username}</span> : null}
                  {s.hasSecret ? <span className="text-ink-3 whitespace-nowrap"> · password stored</span> : null}
                </td>
                <td className={`${td} num text-right`}>{s.tags}</td>
                <td className={td} data-testid="source-ingest">
                  {c ? (
                    <span className={abnormal ? 'text-alarm-1' : 'text-ink-2'} title={c.lastError ?? undefined}>
                      {c.state}
                      {c.lastMessageAt ? <span className="text-ink-3"> · last {formatAge((Date.now() - Date.parse(c.lastMessageAt)) / 1000)} ago</span> : null}
                      {c.staleTags ? <span className="text-unavailable"> · {c.staleTags} stale</span> : null}
                      <SparkplugNote details={c.details} />
                    </span>
                  ) : (
                    <span className="text-ink-3">—</span>
                  )}
                  {r ? (
                    <div role="status" data-testid="connection-result" className={r.ok ? 'text-ink' : 'text-alarm-1'}>
                      {r.ok ? 'Connection OK' : 'Connection failed'} <span className="num">({Math.round(r.latency_ms)} ms)</span>
                      {r.error ? `: ${r.error}` : ''}
                    </div>
                  ) : null}
                </td>
                <td className={`${td} whitespace-nowrap text-right`}>
                  <Button onClick={() => runTest(s.id)} disabled={test.isPending && test.variables === s.id} aria-label={`Test connection of ${s.name}`}>
                    {test.isPending && test.variables === s.id ? 'Testing…' : 'Test connection'}
                  </Button>{' '}
                  <Button kind={selected === s.id ? 'primary' : 'normal'} onClick={() => onSelect(s.id)} aria-pressed={selected === s.id} aria-label={`${s.kind === 'opcua' ? 'Browse' : 'Discover topics of'} ${s.name}`}>
                    {s.kind === 'opcua' ? 'Browse' : 'Topics'}
                  </Button>
                </td>
              </tr>
            );
          })}
        </tbody>
      </table>
      {status.data?.loadError ? <p className="text-alarm-1 mt-1">Ingest could not load the wiring: {status.data.loadError}</p> : null}
      <DeadLetterNote counts={status.data?.deadLetters} />
      <WorkersTable workers={status.data?.workers ?? []} />
      <NewSourceForm plantId={plantId} />
    </Panel>
  );
}

/** Messages ingest could not use: one per bad message however often it arrived, with how many arrived again (a broker redelivery or the same message published again). */
function DeadLetterNote({ counts }: { counts: IngestStatusOut['deadLetters'] | undefined }) {
  if (!counts?.total) return null;
  return (
    <p className="text-ink-2 mt-1" data-testid="dead-letters">
      Dead letters: <span className="num">{counts.lastHour.toLocaleString('en-US')}</span> in the last hour, <span className="num">{counts.total.toLocaleString('en-US')}</span> in total
      {counts.repeats ? (
        <span className="text-ink-3">
          {' '}
          · <span className="num">{counts.repeats.toLocaleString('en-US')}</span> arrived again and counted on their first
        </span>
      ) : null}
    </p>
  );
}

/**
 * The ingest workers (one row each, from their heartbeat rows): a worker that stopped or went
 * silent is shown stale until the API leaves it out (INGEST_WORKER_SHOWN_PERIODS heartbeats).
 */
function WorkersTable({ workers }: { workers: IngestWorkerOut[] }) {
  if (!workers.length) return null;
  return (
    <table className="w-full text-[12px] mt-2" aria-label="Ingest workers">
      <thead>
        <tr>
          <th className={th}>Ingest worker</th>
          <th className={th}>Host</th>
          <th className={`${th} text-right`}>PID</th>
          <th className={th}>Heartbeat</th>
          <th className={`${th} text-right`}>Sources</th>
          <th className={`${th} text-right`}>Messages</th>
          <th className={`${th} text-right`}>Samples</th>
        </tr>
      </thead>
      <tbody>
        {workers.map((w) => (
          <tr key={w.id} data-testid="ingest-worker-row" data-worker-id={w.id} className={w.running ? '' : 'text-ink-3'}>
            <td className={`${td} num`} title={w.id}>
              {w.id.slice(0, 8)}
            </td>
            <td className={td}>{w.host}</td>
            <td className={`${td} num text-right`}>{w.pid}</td>
            <td className={td}>
              {w.running ? (
                <span className="text-ink-2">{formatAge(w.heartbeatAge_s)} ago</span>
              ) : (
                <span className="text-unavailable">{w.stoppedAt ? 'stopped' : 'stale'} · {formatAge(w.heartbeatAge_s)} ago</span>
              )}
            </td>
            <td className={`${td} num text-right`}>{w.sources}</td>
            <td className={`${td} num text-right`}>{w.messages.toLocaleString('en-US')}</td>
            <td className={`${td} num text-right`}>{w.samples.toLocaleString('en-US')}</td>
          </tr>
        ))}
      </tbody>
    </table>
  );
}

/** Sparkplug B figures of a source's status: edge nodes whose data cannot be read until they rebirth, and seq gaps. */
function SparkplugNote({ details }: { details: Record<string, unknown> }) {
  const parsed = sparkplugStatus.safeParse(details.sparkplug);
  if (!parsed.success) return null;
  const sp = parsed.data;
  return (
    <span data-testid="sparkplug-status">
      {sp.needRebirth.length ? (
        <span className="text-alarm-1" title={sp.needRebirth.map((n) => `${n.edgeNode}: ${n.reason}`).join('\n')}>
          {' '}
          · {sp.needRebirth.length} Sparkplug edge node{sp.needRebirth.length > 1 ? 's' : ''} need a rebirth
        </span>
      ) : null}
      {sp.seqGaps ? <span className="text-ink-3"> · {sp.seqGaps} seq gaps</span> : null}
    </span>
  );
}

function IngestBadge({ running, reason }: { running: boolean | undefined; reason: string | undefined }) {
  if (running === undefined) return null;
  return (
    <span title={reason} data-testid="ingest-state" className={`text-[11px] px-1 border rounded-[2px] ${running ? 'border-edge text-ink-3' : 'border-alarm-1 text-alarm-1'}`}>
      {running ? 'ingest running' : 'INGEST NOT RUNNING'}
    </span>
  );
}

type SourceValues = {
  kind: SourceKind;
  name: string;
  url: string;
  username: string;
  password: string;
  options: { topics: string; payload: MqttPayloadFormat; requestRebirth: boolean; sharedGroup: string; securityMode: string; securityPolicy: string };
};
const EMPTY_SOURCE: SourceValues = {
  kind: 'mqtt',
  name: '',
  url: '',
  username: '',
  password: '',
  options: { topics: '#', payload: 'json', requestRebirth: false, sharedGroup: 'flocstream', securityMode: 'None', securityPolicy: 'None' },
};

/** The request body of the chosen kind: MQTT topic filters from a comma list, OPC UA security settings. */
function sourceBody(v: SourceValues): Record<string, unknown> {
  const common = { kind: v.kind, name: v.name, url: v.url.trim(), username: v.username || null, password: v.password || null };
  return v.kind === 'mqtt'
    ? {
        ...common,
        options: {
          topics: v.options.topics.split(',').map((t) => t.trim()).filter(Boolean),
          payload: v.options.payload,
          ...(v.options.requestRebirth ? { requestRebirth: true } : {}),
          // Empty: no shared subscription (one worker holds the source on any broker).
          sharedGroup: v.options.sharedGroup.trim() || null,
        },
      }
    : { ...common, options: { securityMode: v.options.securityMode, securityPolicy: v.options.securityPolicy } };
}
const sourceResolver = contractResolver(sourceCreate, sourceBody);

function NewSourceForm({ plantId }: { plantId: number }) {
  const create = useCreateSource(plantId);
  const [open, setOpen] = useState(false);
  const form = useForm<SourceValues, unknown, SourceCreate>({ defaultValues: EMPTY_SOURCE, resolver: sourceResolver });
  const { errors } = form.formState;
  const kind = useWatch({ control: form.control, name: 'kind' });
  const fe = (name: string) => fieldError(errors, name);
  const submit = form.handleSubmit((body) =>
    create.mutate(body, {
      onSuccess: () => form.reset({ ...form.getValues(), name: '', url: '', password: '' }),
      onError: (e) => applyServerErrors(e, form),
    }),
  );
  if (!open)
    return (
      <div className="mt-2">
        <Button onClick={() => setOpen(true)}>Add source…</Button>
      </div>
    );
  return (
    <form onSubmit={(e) => void submit(e)} noValidate aria-label="New source" className="mt-2 border-t border-edge pt-2 grid grid-cols-[repeat(auto-fill,minmax(170px,1fr))] gap-2 items-start">
      <Field label="Kind" error={fe('kind')}>
        <Select {...form.register('kind')}>
          <option value="mqtt">MQTT broker</option>
          <option value="opcua">OPC UA endpoint</option>
        </Select>
      </Field>
      <Field label="Name" error={fe('name')}>
        <TextInput {...form.register('name')} aria-invalid={errors.name ? true : undefined} />
      </Field>
      <Field label="URL" error={fe('url')} hint={kind === 'mqtt' ? 'mqtt://host:1883, mqtts://, ws://' : 'opc.tcp://host:4840/path'}>
        <TextInput {...form.register('url')} className="num" aria-invalid={errors.url ? true : undefined} />
      </Field>
      <Field label="User name" error={fe('username')}>
        <TextInput {...form.register('username')} autoComplete="off" />
      </Field>
      <Field label="Password" error={fe('password')} hint="stored on the server only">
        <TextInput type="password" {...form.register('password')} autoComplete="new-password" />
      </Field>
      {kind === 'mqtt' ? (
        <>
          <Field label="Topic filters" error={fe('options.topics') ?? fe('options')} hint="comma-separated; # sees everything">
            <TextInput {...form.register('options.topics')} className="num" />
          </Field>
          <Field label="Payload" error={fe('options.payload')} hint="Sparkplug B is read on spBv1.0/ topics either way">
            <Select {...form.register('options.payload')}>
              <option value="json">Flocstream JSON</option>
              <option value="sparkplugB">Sparkplug B only</option>
            </Select>
          </Field>
          <Field label="Shared group" error={fe('options.sharedGroup')} hint="MQTT 5: workers share $share/<group>/…; empty: one worker">
            <TextInput {...form.register('options.sharedGroup')} className="num" />
          </Field>
          <div className="col-span-full text-[12px]">
            <label className="inline-flex items-center gap-1">
              <input type="checkbox" {...form.register('options.requestRebirth')} /> Sparkplug B: request a rebirth from edge nodes whose aliases ingest does not know
            </label>
            <p className="text-ink-3" data-testid="rebirth-caution">
              Caution: off by default. When on, ingest publishes the standard Sparkplug rebirth command (NCMD Node Control/Rebirth, at most once per edge node per
              minute) — the only message Flocstream ever sends to the plant network. A rebirth makes the edge node resend all its metrics; agree it with the owner
              of the control system and the licensed operators first. Without it, such edge nodes are listed here until they rebirth on their own.
            </p>
          </div>
        </>
      ) : (
        <>
          <Field label="Security mode" error={fe('options.securityMode')}>
            <Select {...form.register('options.securityMode')}>
              {OPCUA_SECURITY_MODES.map((m) => (
                <option key={m}>{m}</option>
              ))}
            </Select>
          </Field>
          <Field label="Security policy" error={fe('options.securityPolicy')}>
            <Select {...form.register('options.securityPolicy')}>
              {OPCUA_SECURITY_POLICIES.map((p) => (
                <option key={p}>{p}</option>
              ))}
            </Select>
          </Field>
        </>
      )}
      <div className="flex gap-1 mt-[17px]">
        <Button kind="primary" type="submit" disabled={create.isPending}>
          Add source
        </Button>
        <Button kind="quiet" onClick={() => setOpen(false)}>
          Close
        </Button>
      </div>
      <div className="col-span-full empty:hidden">
        <FormProblem error={create.error} root={errors.root?.server?.message} />
      </div>
      {create.data ? (
        <p role="status" className="text-ink-2 col-span-full">
          Added {create.data.name} ({formatUtc(create.data.createdAt)}). Ingest picks it up within seconds; test the connection above.
        </p>
      ) : null}
    </form>
  );
}
