import fs from 'node:fs/promises';
import path from 'node:path';
import { INGEST_HEARTBEAT_MAX_AGE_S, ingestStatusFile, type IngestStatusOut } from '../../shared/contracts/wiring.ts';
import type { Clock } from '../app-context.ts';
import type { Principal } from '../auth/principal.ts';
import type { WiringRepository } from '../repositories/wiring.repository.ts';

const HOUR_MS = 3_600_000;

/**
 * The ingest process's health as the API reports it: the status file ingest rewrites every few
 * seconds (`<dataDir>/ingest-status.json`, read and validated here, never imported from
 * ingest/), plus dead-letter counts from the database. Ingest is `running` only while its
 * heartbeat is at most 10 s old; otherwise the last known figures are returned with the reason.
 * A plant-scoped token sees only the sources (and dead letters) of its plants.
 */
export function createIngestStatusService({ wiringRepo: repo, dataDir, clock }: { wiringRepo: Pick<WiringRepository, 'deadLetterCounts' | 'sourcePlants'>; dataDir: string; clock: Clock }) {
  const file = path.join(dataDir, 'ingest-status.json');

  return {
    async status(principal: Principal, now = clock()): Promise<IngestStatusOut> {
      const scope = principal.plantIds;
      const deadLetters = await repo.deadLetterCounts(new Date(now - HOUR_MS), scope);
      const empty = { heartbeatAt: null, heartbeatAge_s: null, pid: null, startedAt: null, samplesPerSec: null, lagMs: null, spool: null, writer: null, loadError: null, sources: [], deadLetters };
      let text: string;
      try {
        text = await fs.readFile(file, 'utf8');
      } catch {
        return { running: false, reason: 'ingest has not written its status file (ingest-status.json in the data folder): the ingest process is not running or has not started yet', ...empty };
      }
      let json: unknown;
      try {
        json = JSON.parse(text);
      } catch {
        json = undefined;
      }
      const r = ingestStatusFile.safeParse(json);
      if (!r.success) return { running: false, reason: 'the ingest status file could not be read (partly written, or from a different ingest version)', ...empty };
      const s = r.data;
      let sources = s.sources;
      if (scope) {
        const plantOf = await repo.sourcePlants(sources.map((x) => x.sourceId));
        sources = sources.filter((x) => scope.includes(plantOf.get(x.sourceId) ?? -1));
      }
      const age_s = Math.round((now - Date.parse(s.heartbeatAt)) / 100) / 10;
      const running = age_s <= INGEST_HEARTBEAT_MAX_AGE_S;
      return {
        running,
        ...(running ? {} : { reason: `the last ingest heartbeat is ${age_s} s old (more than ${INGEST_HEARTBEAT_MAX_AGE_S} s): ingest has stopped or is stuck; the figures below are its last` }),
        heartbeatAt: s.heartbeatAt,
        heartbeatAge_s: age_s,
        pid: s.pid,
        startedAt: s.startedAt,
        samplesPerSec: s.samplesPerSec,
        lagMs: s.lagMs,
        spool: s.spool,
        writer: s.writer,
        loadError: s.loadError,
        sources,
        deadLetters,
      };
    },
  };
}
