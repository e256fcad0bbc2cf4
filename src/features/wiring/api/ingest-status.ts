import { queryOptions, useQuery } from '@tanstack/react-query';
import type { IngestStatusOut } from '../../../../shared/contracts/wiring.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/** `GET /ingest/status`: whether ingest runs and how each source's connector is doing. */
export function fetchIngestStatus(signal?: AbortSignal) {
  return api<IngestStatusOut>(paths.ingestStatus, { signal });
}

export const ingestStatusQuery = queryOptions({ queryKey: ['ingest', 'status'], queryFn: ({ signal }) => fetchIngestStatus(signal), refetchInterval: 5000 });

export function useIngestStatus() {
  return useQuery(ingestStatusQuery);
}
