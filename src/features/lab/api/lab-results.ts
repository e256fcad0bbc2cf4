import { queryOptions, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { z } from 'zod';
import type { LabResultInput, LabResultOut, labResultsResponse } from '../../../../shared/contracts/lab.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

type LabResultsResponse = z.output<typeof labResultsResponse>;

/** How many recent results the view lists. */
const RECENT = 50;

export function fetchLabResults(plantId: number, signal?: AbortSignal): Promise<LabResultsResponse> {
  return api<LabResultsResponse>(paths.withQuery(paths.labResults(plantId), { limit: RECENT }), { signal });
}

export const labResultsKey = (plantId: number) => ['plants', plantId, 'lab-results'] as const;

export const labResultsQuery = (plantId: number) =>
  queryOptions({
    queryKey: [...labResultsKey(plantId), 'recent'],
    queryFn: ({ signal }) => fetchLabResults(plantId, signal),
    staleTime: 30_000,
  });

export function useLabResults(plantId: number | null) {
  return useQuery({ ...labResultsQuery(plantId ?? 0), enabled: plantId !== null });
}

/** `POST /plants/:id/lab-results` (operator and up): the server computes the index and may answer 422 with field errors. */
export function postLabResult(plantId: number, body: LabResultInput): Promise<LabResultOut> {
  return api<LabResultOut>(paths.labResults(plantId), { body });
}

export function useEnterLabResult(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (body: LabResultInput) => postLabResult(plantId, body),
    // A new SVI changes the balance's RAS limit too; the board refetches on its next balance.
    onSuccess: () => qc.invalidateQueries({ queryKey: labResultsKey(plantId) }),
  });
}
