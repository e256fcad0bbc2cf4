import { Fragment, useState, type ReactNode } from 'react';
import { Button, ErrorNote, Panel, TextInput } from '../../../components/ui/controls.tsx';
import { usePlantSettings, usePutSettings } from '../api/setup.ts';
import { MainSettingsForm } from './main-settings-form.tsx';

// Edited as fields above the table (admin); below admin they stay read-only rows of the table.
const MAIN_KEYS: string[] = ['mail.recipients', 'srt.target_d', 'srt.window_h', 'storm.peak_flow_factor'];

const td = 'px-1.5 py-1 border-b border-edge/50 align-top';
/**
 * A value wraps inside its column instead of widening the table past the panel (a table cell's
 * own max-width is ignored by table layout, so a block inside it carries the width): the storm
 * hydrograph's points, an e-mail address.
 */
function Wrapped({ children }: { children: ReactNode }) {
  return <div className="max-w-[8rem] ml-auto whitespace-normal break-words">{children}</div>;
}
const isStructured = (v: unknown) => typeof v === 'object' && v !== null;
/** A text as itself, a list of records as its points ("0 h 1 · 6 h 1 · 6 h 0", units from the setting's "h, -"), anything else as JSON. */
function shown(v: unknown, unit: string): string {
  if (typeof v === 'string') return v;
  const units = unit.split(',').map((u) => u.trim());
  if (Array.isArray(v) && v.every((p) => isStructured(p) && !Array.isArray(p))) {
    // No-break spaces inside a point: a narrow column breaks the list between points only.
    return v.map((p: Record<string, unknown>) => Object.values(p).map((x, i) => (units[i] && units[i] !== '-' ? `${String(x)}\u00a0${units[i]}` : String(x))).join('\u00a0')).join(' · ');
  }
  return JSON.stringify(v);
}
/** The unit after a scalar value (a list's units are inside its points). */
const unitOf = (v: unknown, unit: string) => (isStructured(v) || unit === '-' ? '' : unit);
const th = 'text-left font-semibold text-ink-2 px-1.5 py-1 border-b border-edge';

/** The plant's settings with their defaults and where each default comes from; changing one needs the admin role (the server checks it too). */
export function SettingsPanel({ plantId, isAdmin }: { plantId: number; isAdmin: boolean }) {
  const settings = usePlantSettings(plantId);
  const put = usePutSettings(plantId);
  const valueOf = (k: string) => settings.data?.settings.find((x) => x.key === k)?.value;
  const [draft, setDraft] = useState<Record<string, string>>({});
  const save = (key: string) => {
    let value: unknown;
    try {
      value = JSON.parse(draft[key] ?? '');
    } catch {
      value = draft[key];
    }
    put.mutate({ plantId, values: { [key]: value } }, { onSuccess: () => setDraft(({ [key]: _gone, ...rest }) => rest) });
  };
  return (
    <Panel title="Settings of this plant">
      {!isAdmin ? <p className="text-[12px] text-ink-3 mb-1">Read only: settings are changed by an admin.</p> : null}
      <ErrorNote error={settings.error ?? put.error} />
      {isAdmin && settings.data ? <MainSettingsForm key={JSON.stringify(MAIN_KEYS.map((k) => valueOf(k)))} plantId={plantId} values={Object.fromEntries(MAIN_KEYS.map((k) => [k, valueOf(k)]))} /> : null}
      <table className="w-full text-[12px]" aria-label="Settings">
        <thead>
          <tr>
            <th className={th}>Setting</th>
            <th className={`${th} text-right`}>Value</th>
            <th className={`${th} text-right`}>Default</th>
            <th className={th}>From</th>
          </tr>
        </thead>
        <tbody>
          {(settings.data?.settings ?? []).filter((s) => !isAdmin || !MAIN_KEYS.includes(s.key)).map((s) => (
            <tr key={s.key} data-key={s.key}>
              <td className={td}>
                <div className="font-semibold">
                  {/* A long key may break after its dots and underscores (copying it gives the key unchanged). */}
                  {s.key.split(/(?<=[._])/).map((part, i) => (
                    <Fragment key={i}>
                      {part}
                      <wbr />
                    </Fragment>
                  ))}
                </div>
                <div className="text-ink-3">{s.doc}</div>
              </td>
              <td className={`${td} text-right num`}>
                {isAdmin ? (
                  <span className={`inline-flex gap-1 ${isStructured(s.value) ? 'flex-col items-end' : 'whitespace-nowrap'}`}>
                    {isStructured(s.value) ? (
                      <textarea
                        aria-label={s.key}
                        rows={3}
                        className="w-56 px-2 py-1 border border-edge rounded-sm bg-white text-ink num text-left"
                        value={draft[s.key] ?? JSON.stringify(s.value)}
                        onChange={(e) => setDraft((d) => ({ ...d, [s.key]: e.target.value }))}
                      />
                    ) : (
                      <TextInput aria-label={s.key} className="w-28 num text-right" value={draft[s.key] ?? JSON.stringify(s.value)} onChange={(e) => setDraft((d) => ({ ...d, [s.key]: e.target.value }))} />
                    )}
                    {draft[s.key] !== undefined ? <Button onClick={() => save(s.key)}>Save</Button> : null}
                    <span className="text-ink-3">{unitOf(s.value, s.unit)}</span>
                  </span>
                ) : (
                  <Wrapped>
                    {shown(s.value, s.unit)} <span className="text-ink-3">{unitOf(s.value, s.unit)}</span>
                  </Wrapped>
                )}
              </td>
              <td className={`${td} text-right num`}>
                <Wrapped>{shown(s.default, s.unit)}</Wrapped>
              </td>
              <td className={td}>{s.source}</td>
            </tr>
          ))}
        </tbody>
      </table>
    </Panel>
  );
}
