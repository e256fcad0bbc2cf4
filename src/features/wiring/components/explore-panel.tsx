import { useMemo, useState } from 'react';
import type { z } from 'zod';
import type { BrowseNode, discoveredTopic, SourceOut } from '../../../../shared/contracts/wiring.ts';
import { Button, ErrorNote, Panel, TextInput } from '../../../components/ui/controls.tsx';
import { DataTable, useDataTable, type ColumnDef } from '../../../components/ui/data-table.tsx';
import { formatAge } from '../../../lib/format.ts';
import { useBrowse } from '../api/browse.ts';
import { useDiscovery } from '../api/discovery.ts';
import { useTagsConfig } from '../api/tags-config.ts';

type DiscoveredTopic = z.output<typeof discoveredTopic>;

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

type TopicRow = DiscoveredTopic & { tag: string | null };

function topicColumns(source: SourceOut, onPick: (d: TagDraft) => void): ColumnDef<TopicRow>[] {
  return [
    { id: 'topic', header: 'Topic', accessorKey: 'topic', meta: { cellClass: 'num truncate' }, cell: ({ getValue }) => <span title={getValue<string>()}>{getValue<string>()}</span> },
    { id: 'lastPayload', header: 'Last payload', accessorKey: 'lastPayload', enableSorting: false, meta: { width: '30%', cellClass: 'num text-ink-2 truncate' }, cell: ({ getValue }) => <span title={getValue<string>()}>{getValue<string>()}</span> },
    { id: 'count', header: 'Msgs', accessorKey: 'count', meta: { width: '70px', align: 'right', cellClass: 'num' } },
    { id: 'lastSeen', header: 'Seen', accessorFn: (t) => Date.parse(t.lastSeen), meta: { width: '70px', align: 'right', cellClass: 'num text-ink-2' }, cell: ({ row: { original: t } }) => formatAge((Date.now() - Date.parse(t.lastSeen)) / 1000) },
    {
      id: 'action',
      header: () => <span className="sr-only">Action</span>,
      enableSorting: false,
      meta: { width: '100px', align: 'right', cellClass: 'whitespace-nowrap' },
      cell: ({ row: { original: t } }) =>
        t.tag === null ? (
          <Button onClick={() => onPick({ sourceId: source.id, address: t.topic })} aria-label={`New tag for ${t.topic}`}>
            New tag…
          </Button>
        ) : (
          <span className="text-ink-3">{t.tag}</span>
        ),
    },
  ];
}

function TopicsPanel({ source, onPick }: { source: SourceOut; onPick(d: TagDraft): void }) {
  const d = useDiscovery(source.id);
  const cfg = useTagsConfig(source.plantId);
  const [filter, setFilter] = useState('');
  const [onlyNew, setOnlyNew] = useState(true);
  // Ingest's list says which tag took a topic when it last wrote it; a tag added since is
  // matched here by address, so a topic just wired does not look unwired for a few seconds.
  const data = useMemo(() => {
    const byAddress = new Map((cfg.data ?? []).filter((t) => t.source.id === source.id).map((t) => [t.address, t]));
    return (d.data?.topics ?? []).map((t): TopicRow => ({ ...t, tag: byAddress.get(t.topic)?.name ?? (t.tagId !== null ? `tag ${t.tagId}` : null) }));
  }, [d.data, cfg.data, source.id]);
  const columns = useMemo(() => topicColumns(source, onPick), [source, onPick]);
  const globalFilter = useMemo(() => ({ text: filter, onlyNew }), [filter, onlyNew]);
  const table = useDataTable({
    data,
    columns,
    getRowId: (t) => t.topic,
    state: { globalFilter },
    globalFilterFn: (row, _id, f: { text: string; onlyNew: boolean }) => (!f.onlyNew || row.original.tag === null) && row.original.topic.toLowerCase().includes(f.text.toLowerCase()),
    initialState: { sorting: [{ id: 'topic', desc: false }] },
  });
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
      <div className="border border-edge">
        <DataTable
          table={table}
          label="Discovered topics"
          empty={d.isPending ? 'Loading…' : 'No topic matches.'}
          virtual={{ rowHeight: 28, maxHeight: '320px', scrollerLabel: 'Discovered topic rows' }}
          rowProps={() => ({ 'data-testid': 'topic-row', className: 'border-t border-edge/50' })}
        />
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
