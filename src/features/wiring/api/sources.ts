import { queryOptions, useMutation, useQuery, useQueryClient } from '@tanstack/react-query';
import type { z } from 'zod';
import type { SourceCreate, SourceOut, sourcesResponse } from '../../../../shared/contracts/wiring.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/** `GET /plants/:plantId/sources`: brokers and endpoints; passwords never come back (hasSecret). */
export function fetchSources(plantId: number, signal?: AbortSignal) {
  return api<z.output<typeof sourcesResponse>>(paths.sources(plantId), { signal }).then((r) => r.sources);
}

export const sourcesQuery = (plantId: number) => queryOptions({ queryKey: ['plants', plantId, 'sources'], queryFn: ({ signal }) => fetchSources(plantId, signal) });

export function useSources(plantId: number) {
  return useQuery(sourcesQuery(plantId));
}

/** `POST /plants/:plantId/sources`. */
export function useCreateSource(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: (body: SourceCreate) => api<SourceOut>(paths.sources(plantId), { body }),
    onSuccess: () => qc.invalidateQueries({ queryKey: sourcesQuery(plantId).queryKey }),
  });
}
