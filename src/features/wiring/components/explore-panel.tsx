import { useState } from 'react';
import type { BrowseNode, SourceOut } from '../../../../shared/contracts/wiring.ts';
import { Button, ErrorNote, Panel, TextInput } from '../../../components/ui/controls.tsx';
import { formatAge } from '../../../lib/format.ts';
import { useBrowse } from '../api/browse.ts';
import { useDiscovery } from '../api/discovery.ts';
import { useTagsConfig } from '../api/tags-config.ts';

export interface TagDraft {
  sourceId: number;
  address: string;
  name?: string;
  description?: string;
}

/** What a source offers: MQTT topics seen by ingest, or the OPC UA address space as a tree. */
export function ExplorePanel({ source, onPick }: { source: SourceOut | undefined; onPick(d: TagDraft): void }) {
  if (!source) {
    return (
      <Panel title="Explore a source">
        <p className="text-ink-3">Pick a source: MQTT shows the topics ingest has seen, OPC UA lets you browse the server.</p>
      </Panel>
    );
  }
  return source.kind === 'mqtt' ? <TopicsPanel source={source} onPick={onPick} /> : <BrowsePanel source={source} onPick={onPick} />;
}

function TopicsPanel({ source, onPick }: { source: SourceOut; onPick(d: TagDraft): void }) {
  const d = useDiscovery(source.id);
  const cfg = useTagsConfig(source.plantId);
  const [filter, setFilter] = useState('');
  const [onlyNew, setOnlyNew] = useState(true);
  // Ingest's list says which tag took a topic when it last wrote it; a tag added since is
  // matched here by address, so a topic just wired does not look unwired for a few seconds.
  const byAddress = new Map((cfg.data ?? []).filter((t) => t.source.id === source.id).map((t) => [t.address, t]));
  const topics = (d.data?.topics ?? [])
    .map((t) => ({ ...t, tag: byAddress.get(t.topic)?.name ?? (t.tagId !== null ? `tag ${t.tagId}` : null) }))
    .filter((t) => (!onlyNew || t.tag === null) && t.topic.toLowerCase().includes(filter.toLowerCase()));
  return (
    <Panel title={`Topics on ${source.name}`}>
      <div className="flex flex-wrap items-center gap-2 mb-1">
        <TextInput value={filter} onChange={(e) => setFilter(e.target.value)} placeholder="filter topics" aria-label="Filter topics" className="w-56" />
        <label className="text-[12px] text-ink-2 flex items-center gap-1">
          <input type="checkbox" checked={onlyNew} onChange={(e) => setOnlyNew(e.target.checked)} /> only topics without a tag
        </label>
        <span className="text-[12px] text-ink-3 ml-auto">
          {d.data?.asOf ? <>listed by ingest {formatAge((Date.now() - Date.parse(d.data.asOf)) / 1000)} ago</> : (d.data?.note ?? '')}
        </span>
      </div>
      <ErrorNote error={d.error} />
      <div className="max-h-[320px] overflow-y-auto border border-edge bg-panel-2">
        <table className="w-full text-[12px]" aria-label="Discovered topics">
          <thead className="sticky top-0 bg-panel">
            <tr>
              <th className="text-left px-1.5 py-1 font-semibold text-ink-2">Topic</th>
              <th className="text-left px-1.5 py-1 font-semibold text-ink-2">Last payload</th>
              <th className="text-right px-1.5 py-1 font-semibold text-ink-2">Msgs</th>
              <th className="text-right px-1.5 py-1 font-semibold text-ink-2">Seen</th>
              <th className="px-1.5 py-1">
                <span className="sr-only">Action</span>
              </th>
            </tr>
          </thead>
          <tbody>
            {topics.slice(0, 300).map((t) => (
              <tr key={t.topic} className="border-t border-edge/50" data-testid="topic-row">
                <td className="px-1.5 py-0.5 num break-all">{t.topic}</td>
                <td className="px-1.5 py-0.5 num text-ink-2 max-w-[220px] truncate" title={t.lastPayload}>
                  {t.lastPayload}
                </td>
                <td className="px-1.5 py-0.5 num text-right">{t.count}</td>
                <td className="px-1.5 py-0.5 num text-right text-ink-2">{formatAge((Date.now() - Date.parse(t.lastSeen)) / 1000)}</td>
                <td className="px-1.5 py-0.5 text-right whitespace-nowrap">
                  {t.tag === null ? (
                    <Button onClick={() => onPick({ sourceId: source.id, address: t.topic })} aria-label={`New tag for ${t.topic}`}>
                      New tag…
                    </Button>
                  ) : (
                    <span className="text-ink-3">{t.tag}</span>
                  )}
                </td>
              </tr>
            ))}
          </tbody>
        </table>
        {topics.length === 0 ? <p className="p-2 text-ink-3">{d.isPending ? 'Loading…' : 'No topic matches.'}</p> : null}
        {topics.length > 300 ? <p className="p-2 text-ink-3">Showing 300 of {topics.length}; filter to narrow.</p> : null}
      </div>
    </Panel>
  );
}

function BrowsePanel({ source, onPick }: { source: SourceOut; onPick(d: TagDraft): void }) {
  const root = useBrowse(source.id, undefined);
  return (
    <Panel title={`Browse ${source.name}`}>
      <ErrorNote error={root.error} />
      {root.isPending ? <p className="text-ink-3">Connecting to the server…</p> : null}
      <ul role="tree" aria-label={`Address space of ${source.name}`} className="max-h-[320px] overflow-y-auto text-[12px] border border-edge bg-panel-2 p-1">
        {(root.data?.children ?? []).map((n) => (
          <BrowseItem key={n.nodeId} sourceId={source.id} node={n} depth={0} onPick={onPick} />
        ))}
      </ul>
    </Panel>
  );
}

function BrowseItem({ sourceId, node, depth, onPick }: { sourceId: number; node: BrowseNode; depth: number; onPick(d: TagDraft): void }) {
  const [open, setOpen] = useState(false);
  const kids = useBrowse(sourceId, node.nodeId, open && node.hasChildren);
  const isVar = node.nodeClass === 'Variable';
  return (
    <li role="treeitem" aria-expanded={node.hasChildren ? open : undefined} aria-level={depth + 1} aria-selected={false}>
      <div className="flex items-center gap-1 py-px" style={{ paddingLeft: depth * 14 }}>
        {node.hasChildren ? (
          <button type="button" className="w-5 h-5 text-ink-2" onClick={() => setOpen((o) => !o)} aria-label={`${open ? 'Collapse' : 'Expand'} ${node.displayName}`}>
            {open ? '▾' : '▸'}
          </button>
        ) : (
          <span className="w-5" />
        )}
        <span className={isVar ? 'text-ink' : 'text-ink-2'}>{node.displayName}</span>
        <span className="num text-ink-3 text-[11px]">{node.nodeId}</span>
        {node.dataType ? <span className="text-ink-3 text-[11px]">{node.dataType}</span> : null}
        {isVar ? (
          <Button className="ml-auto h-6" onClick={() => onPick({ sourceId, address: node.nodeId, name: node.browseName.replace(/^\d+:/, ''), description: node.displayName })} aria-label={`New tag for ${node.displayName}`}>
            New tag…
          </Button>
        ) : null}
      </div>
      {open ? (
        <ul role="group">
          {kids.isPending ? <li className="text-ink-3" style={{ paddingLeft: depth * 14 + 24 }}>loading…</li> : null}
          {kids.error ? (
            <li className="text-alarm-1" style={{ paddingLeft: depth * 14 + 24 }}>
              {(kids.error as Error).message}
            </li>
          ) : null}
          {(kids.data?.children ?? []).map((c) => (
            <BrowseItem key={c.nodeId} sourceId={sourceId} node={c} depth={depth + 1} onPick={onPick} />
          ))}
        </ul>
      ) : null}
    </li>
  );
}
