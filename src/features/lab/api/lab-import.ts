import { useMutation, useQueryClient } from '@tanstack/react-query';
import type { LabResultOut } from '../../../../shared/contracts/lab.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';
import { labResultsKey } from './lab-results.ts';

/** `POST /plants/:id/lab-results/import` with the file as a `text/csv` body (errors as `line.<n>.<field>`). */
export function postLabCsv(plantId: number, csv: string): Promise<{ imported: number; results: LabResultOut[] }> {
  return api(paths.labImport(plantId), { csv });
}

export function useImportLabCsv(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (csv: string) => postLabCsv(plantId, csv),
    onSuccess: () => qc.invalidateQueries({ queryKey: labResultsKey(plantId) }),
  });
}
