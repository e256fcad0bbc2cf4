import type { TagSet } from './pipeline/tag-set.ts';
import type { TagConfig } from './pipeline/types.ts';

export type ConnectionState = 'connecting' | 'connected' | 'reconnecting' | 'disconnected' | 'error';

/** Per-source figures for the status file (ingest/status.ts). */
export interface ConnectorStatus {
  sourceId: number;
  name: string;
  kind: 'mqtt' | 'opcua';
  state: ConnectionState;
  lastError: string | null;
  connectedAt: string | null;
  lastMessageAt: string | null;
  messages: number;
  samples: number;
  unmapped: number;
  deadLetters: number;
  suppressed: number;
  /** Readings received but not yet committed or spooled (MQTT: PUBACKs held back). */
  unacknowledged: number;
  tags: number;
  staleTags: number;
  reconnects: number;
  details: Record<string, unknown>;
}

/** A running connection to one source. */
export interface Connector {
  readonly sourceId: number;
  status(now: number): ConnectorStatus;
  updateTags(tags: readonly TagConfig[]): void;
  close(): Promise<void>;
}

/** The `sources` row fields a connector needs. */
export interface SourceConfig {
  id: number;
  name: string;
  kind: 'mqtt' | 'opcua';
  url: string;
  username: string | null;
  secret: string | null;
  options: Record<string, unknown>;
}

/** The status fields every connector reports the same way, from its own state. */
export function sourceStatusBase(
  source: SourceConfig,
  c: { state: ConnectionState; lastError: string | null; connectedAt: number | null; lastMessageAt: number | null; tags: TagSet },
  now: number,
): Pick<ConnectorStatus, 'sourceId' | 'name' | 'kind' | 'state' | 'lastError' | 'connectedAt' | 'lastMessageAt' | 'tags' | 'staleTags'> {
  return {
    sourceId: source.id,
    name: source.name,
    kind: source.kind,
    state: c.state,
    lastError: c.lastError,
    connectedAt: c.connectedAt ? new Date(c.connectedAt).toISOString() : null,
    lastMessageAt: c.lastMessageAt ? new Date(c.lastMessageAt).toISOString() : null,
    tags: c.tags.size,
    staleTags: c.tags.staleCount(now),
  };
}
