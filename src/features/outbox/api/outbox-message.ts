import { queryOptions, useQuery } from '@tanstack/react-query';
import type { OutboxMessage } from '../../../../shared/contracts/outbox.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

export function fetchOutboxMessage(id: number, signal?: AbortSignal): Promise<OutboxMessage> {
  return api<OutboxMessage>(paths.outboxMessage(id), { signal });
}

/** A caught message never changes, so it is cached for good. */
export const outboxMessageQuery = (id: number) =>
  queryOptions({
    queryKey: ['outbox', id],
    queryFn: ({ signal }) => fetchOutboxMessage(id, signal),
    staleTime: Infinity,
  });

export function useOutboxMessage(id: number | null) {
  return useQuery({ ...outboxMessageQuery(id ?? 0), enabled: id !== null });
}
