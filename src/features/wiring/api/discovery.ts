import { queryOptions, useQuery } from '@tanstack/react-query';
import type { z } from 'zod';
import type { discoveryOut } from '../../../../shared/contracts/wiring.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

export type DiscoveryOut = z.infer<typeof discoveryOut>;

/** `GET /sources/:id/discovery`: topics ingest has seen on an MQTT source, with their last payload. */
export function fetchDiscovery(sourceId: number, signal?: AbortSignal) {
  return api<DiscoveryOut>(paths.sourceDiscovery(sourceId), { signal });
}

// Ingest rewrites the list every few seconds; follow it while the view is open.
export const discoveryQuery = (sourceId: number) => queryOptions({ queryKey: ['sources', sourceId, 'discovery'], queryFn: ({ signal }) => fetchDiscovery(sourceId, signal), refetchInterval: 3000 });

export function useDiscovery(sourceId: number) {
  return useQuery(discoveryQuery(sourceId));
}
