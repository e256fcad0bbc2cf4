import { asc, desc, eq, gte, sql } from 'drizzle-orm';
import type { Db } from '../db/client.ts';
import { ingestWorkers, mqttDiscovery } from '../db/schema/index.ts';

/** An `ingest_workers` row with its heartbeat age measured on the database's clock. */
export interface IngestWorkerRow {
  id: string;
  host: string;
  pid: number;
  startedAt: Date;
  heartbeatAt: Date;
  heartbeat_ms: number;
  stoppedAt: Date | null;
  status: unknown;
  heartbeatAge_s: number;
}

/** What ingest writes for the API: worker heartbeats and MQTT discovery (server/db/schema/ingest.ts). */
export function ingestRepository(db: Db) {
  return {
    /** Workers heard from in the last day, latest heartbeat first. */
    async workers(): Promise<IngestWorkerRow[]> {
      return db
        .select({
          id: ingestWorkers.id,
          host: ingestWorkers.host,
          pid: ingestWorkers.pid,
          startedAt: ingestWorkers.startedAt,
          heartbeatAt: ingestWorkers.heartbeatAt,
          heartbeat_ms: ingestWorkers.heartbeat_ms,
          stoppedAt: ingestWorkers.stoppedAt,
          status: ingestWorkers.status,
          // The heartbeat time is the database's now() too: no clock of another host involved.
          heartbeatAge_s: sql<number>`round(extract(epoch from now() - ${ingestWorkers.heartbeatAt})::numeric, 1)::float8`,
        })
        .from(ingestWorkers)
        .where(gte(ingestWorkers.heartbeatAt, sql`now() - interval '1 day'`))
        .orderBy(desc(ingestWorkers.heartbeatAt));
    },

    /** Topics seen on one MQTT source, in topic order. */
    async discovery(sourceId: number) {
      return db
        .select({
          topic: mqttDiscovery.topic,
          lastPayload: mqttDiscovery.lastPayload,
          firstSeen: mqttDiscovery.firstSeen,
          lastSeen: mqttDiscovery.lastSeen,
          count: mqttDiscovery.count,
          tagId: mqttDiscovery.tagId,
        })
        .from(mqttDiscovery)
        .where(eq(mqttDiscovery.sourceId, sourceId))
        .orderBy(asc(mqttDiscovery.topic));
    },
  };
}
export type IngestRepository = ReturnType<typeof ingestRepository>;
