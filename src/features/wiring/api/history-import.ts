import { queryOptions, useQuery } from '@tanstack/react-query';
import type { HistoryJobOut } from '../../../../shared/contracts/history.ts';
import { api, ApiError } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

export interface HistoryUploadOptions {
  dryRun: boolean;
  tsFormat?: string;
  timezone?: string;
}

/**
 * `POST /plants/:plantId/history` with the file itself as the body. XMLHttpRequest rather than
 * the fetch client: fetch reports no upload progress (WHATWG Fetch has no request-body progress
 * events; XMLHttpRequest's `upload.onprogress` has them), and a historian file can be a gigabyte.
 * Errors become the same ApiError the fetch client throws.
 */
export function uploadHistory(plantId: number, file: File, o: HistoryUploadOptions, onProgress: (sent: number) => void): { done: Promise<{ jobId: number }>; abort: () => void } {
  const xhr = new XMLHttpRequest();
  const done = new Promise<{ jobId: number }>((resolve, reject) => {
    xhr.open('POST', paths.withQuery(paths.historyImport(plantId), { dryRun: o.dryRun ? 1 : undefined, tsFormat: o.tsFormat || undefined, timezone: o.timezone || undefined }));
    xhr.setRequestHeader('Content-Type', 'text/csv');
    xhr.setRequestHeader('Accept', 'application/json');
    xhr.setRequestHeader('X-File-Name', encodeURIComponent(file.name));
    xhr.withCredentials = true;
    xhr.upload.onprogress = (e) => onProgress(e.lengthComputable && e.total > 0 ? e.loaded / e.total : 0);
    xhr.onerror = () => reject(new ApiError(0, 'network', 'the upload was interrupted'));
    xhr.onabort = () => reject(new ApiError(0, 'aborted', 'upload cancelled'));
    xhr.onload = () => {
      let body: { jobId?: number; error?: { code?: string; message?: string; fields?: Record<string, string[]> } };
      try {
        body = JSON.parse(xhr.responseText || '{}');
      } catch {
        body = { error: { code: 'bad_response', message: 'the server answered with something that is not JSON' } };
      }
      if (xhr.status === 202 && typeof body.jobId === 'number') return resolve({ jobId: body.jobId });
      reject(new ApiError(xhr.status, body.error?.code ?? 'http_error', body.error?.message ?? `${xhr.status} ${xhr.statusText}`, body.error?.fields));
    };
    xhr.send(file);
  });
  return { done, abort: () => xhr.abort() };
}

/** `GET /jobs/:jobId`, polled every second while the job is queued or running. */
export const historyJobQuery = (jobId: number) =>
  queryOptions({
    queryKey: ['history-job', jobId],
    queryFn: ({ signal }) => api<HistoryJobOut>(paths.job(jobId), { signal }),
    refetchInterval: (q) => (q.state.data && (q.state.data.state === 'done' || q.state.data.state === 'failed') ? false : 1000),
  });

export function useHistoryJob(jobId: number | null) {
  return useQuery({ ...historyJobQuery(jobId ?? 0), enabled: jobId !== null });
}
