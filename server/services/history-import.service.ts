import { randomUUID } from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import type { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import type { HistoryImportQuery, HistoryJobOut } from '../../shared/contracts/history.ts';
import type { Principal } from '../auth/principal.ts';
import { HttpError, NotFoundError, ValidationError } from '../http/errors.ts';
import type { HistoryJobRow, HistoryRepository } from '../repositories/history.repository.ts';
import type { Actor, AuditLog } from './audit.service.ts';
import type { PlantAccess } from './plant.service.ts';

export interface HistoryImportServiceDeps {
  historyRepo: Pick<HistoryRepository, 'createJob' | 'job' | 'finish'>;
  plantAccess: PlantAccess;
  audit: AuditLog;
  /** Folder the uploads are streamed into (in the data folder). */
  uploadDir: string;
  /** Largest file accepted [bytes]. */
  maxBytes: number;
  /** Puts the job on the history queue; false when no history worker runs. */
  enqueue: (kind: 'import', id: number) => Promise<boolean>;
}

/** Counts the bytes passing and stops the stream past `max` (a 413, the partial file removed). */
class TooLarge extends HttpError {
  constructor(max: number) {
    super(413, 'payload_too_large', `the file is larger than ${max} bytes`);
  }
}

export function historyJobOut(j: HistoryJobRow): HistoryJobOut {
  const r = j.result;
  const num = (v: unknown) => (typeof v === 'number' ? v : null);
  const str = (v: unknown) => (typeof v === 'string' ? v : null);
  return {
    id: j.id,
    plantId: j.plantId,
    kind: j.kind,
    state: j.state,
    progress: j.progress,
    rows: j.rows,
    rejected: j.rejected,
    errors: j.errors,
    startedAt: j.startedAt?.toISOString() ?? null,
    finishedAt: j.finishedAt?.toISOString() ?? null,
    dryRun: j.options.dryRun === true,
    inserted: num(r.inserted),
    from: str(r.from),
    to: str(r.to),
    recomputeJobId: num(r.recomputeJobId),
    message: str(r.message),
  };
}

/**
 * Historian import: the upload is streamed to a file in the data folder (never held in
 * memory), a job row is made and queued; the work itself is server/jobs/history-jobs.ts.
 * Integrator and up, plant-scoped, audited. `job` answers for imports and recomputes alike.
 */
export function createHistoryImportService({ historyRepo, plantAccess, audit, uploadDir, maxBytes, enqueue }: HistoryImportServiceDeps) {
  return {
    async start(principal: Actor, plantId: number, q: HistoryImportQuery, body: Readable, meta: { contentType: string | null; fileName?: string | null }): Promise<{ jobId: number }> {
      await plantAccess.requirePlant(principal, plantId);
      const ct = (meta.contentType ?? '').split(';')[0]!.trim().toLowerCase();
      if (!['text/csv', 'application/csv', 'text/plain', 'application/octet-stream'].includes(ct)) {
        body.resume();
        throw new HttpError(415, 'unsupported_media_type', 'send the CSV file itself as the body (Content-Type text/csv or application/octet-stream)');
      }
      fs.mkdirSync(uploadDir, { recursive: true });
      const file = path.join(uploadDir, `upload-${randomUUID()}.csv`);
      let bytes = 0;
      try {
        await pipeline(
          body,
          async function* (src: AsyncIterable<Buffer>) {
            for await (const chunk of src) {
              bytes += chunk.length;
              if (bytes > maxBytes) throw new TooLarge(maxBytes);
              yield chunk;
            }
          },
          fs.createWriteStream(file),
        );
      } catch (err) {
        fs.rmSync(file, { force: true });
        if (err instanceof HttpError) throw err;
        throw new HttpError(400, 'upload_failed', `the upload did not complete: ${(err as Error).message}`);
      }
      if (bytes === 0) {
        fs.rmSync(file, { force: true });
        throw new ValidationError({ body: ['the file is empty'] }, 'the file is empty');
      }
      const options = { ...q, file, bytes, fileName: meta.fileName ?? null };
      const id = await historyRepo.createJob({ plantId, kind: 'import', options, createdBy: principal.userId });
      await audit.record(principal, q.dryRun ? 'history.check' : 'history.import', `plant:${plantId}`, { jobId: id, bytes, fileName: meta.fileName ?? null, layout: q.layout, tsFormat: q.tsFormat, timezone: q.timezone });
      if (!(await enqueue('import', id))) {
        fs.rmSync(file, { force: true });
        await historyRepo.finish(id, { state: 'failed', rows: 0, rejected: 0, errors: [], result: { message: 'no history worker runs in this API process' } });
        throw new HttpError(503, 'unavailable', 'history imports are not available: no job worker runs in this API process');
      }
      return { jobId: id };
    },

    async job(principal: Principal, jobId: number): Promise<HistoryJobOut> {
      const j = await historyRepo.job(jobId);
      if (!j) throw new NotFoundError(`no job ${jobId}`);
      // A job of a plant outside the caller's scope answers 403, as the plant itself would.
      await plantAccess.requirePlant(principal, j.plantId);
      return historyJobOut(j);
    },
  };
}
export type HistoryImportService = ReturnType<typeof createHistoryImportService>;
