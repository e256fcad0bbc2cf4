import { useState } from 'react';
import type { ConfigChange } from '../../../../shared/contracts/plant-config.ts';
import { Button, ErrorNote, Panel } from '../../../components/ui/controls.tsx';
import { fetchPlantConfig, usePutConfig } from '../api/setup.ts';

/** Export the plant as one JSON document; upload one to see what it would change, then apply it in one transaction. */
export function ConfigPanel({ plantId, code }: { plantId: number; code: string }) {
  const put = usePutConfig(plantId);
  const [doc, setDoc] = useState<unknown>(null);
  const [changes, setChanges] = useState<ConfigChange[] | null>(null);
  const [problem, setProblem] = useState<unknown>(null);
  const download = async () => {
    try {
      const d = await fetchPlantConfig(plantId);
      const url = URL.createObjectURL(new Blob([JSON.stringify(d, null, 2)], { type: 'application/json' }));
      const a = document.createElement('a');
      a.href = url;
      a.download = `${code}.plant.json`;
      a.click();
      URL.revokeObjectURL(url);
    } catch (e) {
      setProblem(e);
    }
  };
  const upload = async (file: File | undefined) => {
    setChanges(null);
    setProblem(null);
    if (!file) return;
    try {
      const parsed: unknown = JSON.parse(await file.text());
      setDoc(parsed);
      put.mutate({ doc: parsed, dryRun: true }, { onSuccess: (r) => setChanges(r.changes), onError: setProblem });
    } catch (e) {
      setProblem(new Error(`not a JSON document: ${(e as Error).message}`));
    }
  };
  const apply = () => put.mutate({ doc, dryRun: false }, { onSuccess: () => setChanges(null), onError: setProblem });
  return (
    <Panel title="Configuration document" actions={<Button onClick={download}>Download JSON</Button>}>
      <label className="text-[12px] text-ink-2 flex items-center gap-2">
        Compare with a document
        <input type="file" accept="application/json,.json" onChange={(e) => void upload(e.target.files?.[0])} className="text-[12px]" />
      </label>
      <ErrorNote error={problem} />
      {changes ? (
        <div className="mt-1">
          <p className="text-[12px]">{changes.length ? `${changes.length} changes:` : 'The plant already matches this document.'}</p>
          <ul className="text-[12px] max-h-48 overflow-auto num" data-testid="config-changes">
            {changes.map((c) => (
              <li key={`${c.op}-${c.path}`}>
                <span className="font-semibold">{c.op}</span> {c.path}
              </li>
            ))}
          </ul>
          {changes.length ? (
            <Button kind="primary" onClick={apply} disabled={put.isPending}>
              Apply {changes.length} changes
            </Button>
          ) : null}
        </div>
      ) : null}
    </Panel>
  );
}
