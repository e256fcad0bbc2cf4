import { useMutation, useQueryClient } from '@tanstack/react-query';
import type { TagImportOut } from '../../../../shared/contracts/wiring.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';
import { invalidateWiring } from './tags-config.ts';

/** `POST /plants/:plantId/tags/import[?dryRun=1]` with the file as a `text/csv` body; a 422 carries the row errors (`line.<n>.<column>`). */
export function postTagCsv(plantId: number, csv: string, dryRun: boolean): Promise<TagImportOut> {
  return api(paths.withQuery(paths.tagsImport(plantId), { dryRun: dryRun ? 1 : undefined }), { csv });
}

/** Check (dry run) then import: the same file, the second time stored all or nothing. */
export function useTagImport(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: ({ csv, dryRun }: { csv: string; dryRun: boolean }) => postTagCsv(plantId, csv, dryRun),
    onSuccess: (out) => (out.dryRun ? undefined : invalidateWiring(qc, plantId)),
  });
}
