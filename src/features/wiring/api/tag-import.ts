import { useMutation, useQueryClient } from '@tanstack/react-query';
import type { TagImportOut } from '../../../../shared/contracts/wiring.ts';
import { ApiError } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';
import { invalidateWiring } from './tags-config.ts';

/**
 * `POST /plants/:plantId/tags/import[?dryRun=1]` with the file as a `text/csv` body. The JSON
 * client only sends JSON, so the body is sent here and a failure mapped to the same ApiError;
 * a 422 of a real import carries the row errors too (`line.<n>.<column>`).
 */
export async function postTagCsv(plantId: number, csv: string, dryRun: boolean): Promise<TagImportOut> {
  const res = await fetch(paths.withQuery(paths.tagsImport(plantId), { dryRun: dryRun ? 1 : undefined }), {
    method: 'POST',
    headers: { Accept: 'application/json', 'Content-Type': 'text/csv' },
    body: csv,
    credentials: 'same-origin',
  });
  const text = await res.text();
  let data: unknown;
  try {
    data = text ? JSON.parse(text) : undefined;
  } catch {
    data = undefined;
  }
  if (!res.ok) {
    const e = (data as { error?: { code?: string; message?: string; fields?: Record<string, string[]> } } | undefined)?.error;
    throw new ApiError(res.status, e?.code ?? 'http_error', e?.message ?? `${res.status} ${res.statusText}`, e?.fields);
  }
  return data as TagImportOut;
}

/** Check (dry run) then import: the same file, the second time stored all or nothing. */
export function useTagImport(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: ({ csv, dryRun }: { csv: string; dryRun: boolean }) => postTagCsv(plantId, csv, dryRun),
    onSuccess: (out) => (out.dryRun ? undefined : invalidateWiring(qc, plantId)),
  });
}
