import { keepPreviousData, queryOptions, useQueries } from '@tanstack/react-query';
import type { SamplePoint, SamplesResponse } from '../../../../shared/contracts/plant-api.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/** Pages followed at most for one window (the server aims at ≤ ~2000 points, so one page is usual). */
const MAX_PAGES = 4;

/**
 * `GET /api/v1/plants/:plantId/tags/:tagId/samples?from&to`: the server picks raw samples or the
 * 1 min / 1 h rollups for the window, so a zoom simply asks again with the new window.
 */
export async function fetchSamples(plantId: number, tagId: number, from: string, to: string, signal?: AbortSignal): Promise<SamplesResponse> {
  const first = await api<SamplesResponse>(paths.withQuery(paths.tagSamples(plantId, tagId), { from, to }), { signal });
  let points: SamplePoint[] = first.points;
  let cursor = first.nextCursor;
  for (let i = 1; cursor && i < MAX_PAGES; i++) {
    const next = await api<SamplesResponse>(paths.withQuery(paths.tagSamples(plantId, tagId), { from, to, cursor }), { signal });
    points = points.concat(next.points);
    cursor = next.nextCursor;
  }
  return { ...first, points, nextCursor: cursor };
}

export const samplesQuery = (plantId: number, tagId: number, from: string, to: string) =>
  queryOptions({
    queryKey: ['plants', plantId, 'tags', tagId, 'samples', from, to],
    queryFn: ({ signal }) => fetchSamples(plantId, tagId, from, to, signal),
    staleTime: 15_000,
    // The previous window stays drawn while the zoomed or panned one loads.
    placeholderData: keepPreviousData,
  });

/** One samples query per pen, all for the same window. */
export function usePenSamples(plantId: number | null, tagIds: number[], from: string, to: string) {
  return useQueries({ queries: tagIds.map((id) => ({ ...samplesQuery(plantId ?? 0, id, from, to), enabled: plantId !== null })) });
}
