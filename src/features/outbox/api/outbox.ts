import { queryOptions, useQuery } from '@tanstack/react-query';
import type { OutboxSummary } from '../../../../shared/contracts/outbox.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

export function fetchOutbox(signal?: AbortSignal): Promise<OutboxSummary[]> {
  return api<OutboxSummary[]>(paths.withQuery(paths.outbox, { limit: 200 }), { signal });
}

export const outboxQuery = queryOptions({
  queryKey: ['outbox'],
  queryFn: ({ signal }) => fetchOutbox(signal),
  // Mail arrives from the balance engine without a stream event; a gentle poll picks it up.
  refetchInterval: 15_000,
});

export function useOutbox() {
  return useQuery(outboxQuery);
}
