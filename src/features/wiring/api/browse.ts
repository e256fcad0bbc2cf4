import { queryOptions, useQuery } from '@tanstack/react-query';
import type { z } from 'zod';
import type { browseOut } from '../../../../shared/contracts/wiring.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/** `GET /sources/:id/browse?nodeId`: children of one OPC UA node (default the Objects folder). */
export function fetchBrowse(sourceId: number, nodeId: string | undefined, signal?: AbortSignal) {
  return api<z.output<typeof browseOut>>(paths.withQuery(paths.sourceBrowse(sourceId), { nodeId }), { signal });
}

export const browseQuery = (sourceId: number, nodeId: string | undefined) =>
  queryOptions({ queryKey: ['sources', sourceId, 'browse', nodeId ?? ''], queryFn: ({ signal }) => fetchBrowse(sourceId, nodeId, signal), staleTime: 60_000, retry: false });

export function useBrowse(sourceId: number, nodeId: string | undefined, enabled = true) {
  return useQuery({ ...browseQuery(sourceId, nodeId), enabled });
}
