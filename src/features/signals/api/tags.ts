import { queryOptions, useQuery } from '@tanstack/react-query';
import type { z } from 'zod';
import type { tagsResponse } from '../../../../shared/contracts/plant-api.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

export type TagsAnswer = z.output<typeof tagsResponse>;

/** `GET /api/v1/plants/:plantId/tags`: every tag with its latest value, quality, age and source. */
export function fetchTags(plantId: number, signal?: AbortSignal): Promise<TagsAnswer> {
  return api<TagsAnswer>(paths.plantTags(plantId), { signal });
}

// Live values arrive on the stream between refetches; the refetch brings new tags, mapping
// changes and a fresh server clock for the ages.
export const tagsQuery = (plantId: number) =>
  queryOptions({
    queryKey: ['plants', plantId, 'tags'],
    queryFn: ({ signal }) => fetchTags(plantId, signal),
    staleTime: 30_000,
    refetchInterval: 60_000,
  });

export function useTags(plantId: number | null) {
  return useQuery({ ...tagsQuery(plantId ?? 0), enabled: plantId !== null });
}
