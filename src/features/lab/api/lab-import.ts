import { useMutation, useQueryClient } from '@tanstack/react-query';
import type { LabResultOut } from '../../../../shared/contracts/lab.ts';
import { ApiError } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';
import { labResultsKey } from './lab-results.ts';

/**
 * `POST /plants/:id/lab-results/import` with the file as a `text/csv` body. The one JSON client
 * (lib/api-client.ts) only sends JSON, so this endpoint sends its body itself and maps a failed
 * answer to the same ApiError (with the server's `line.<n>.<field>` errors).
 */
export async function postLabCsv(plantId: number, csv: string): Promise<{ imported: number; results: LabResultOut[] }> {
  const res = await fetch(paths.labImport(plantId), { method: 'POST', headers: { Accept: 'application/json', 'Content-Type': 'text/csv' }, body: csv, credentials: 'same-origin' });
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
  return data as { imported: number; results: LabResultOut[] };
}

export function useImportLabCsv(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (csv: string) => postLabCsv(plantId, csv),
    onSuccess: () => qc.invalidateQueries({ queryKey: labResultsKey(plantId) }),
  });
}
