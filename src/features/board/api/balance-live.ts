import { queryOptions, useQuery } from '@tanstack/react-query';
import type { Balance } from '../../../../shared/contracts/balance.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/** `GET /plants/:id/balance/live`: the latest balance, or null with the server's reason. */
export interface BalanceLive {
  plantId: number;
  balance: Balance | null;
  /** Seconds since the computation, as the server saw it when answering. */
  age_s: number | null;
  reason?: string;
  /** Client clock when this answer arrived [epoch ms]; age now = age_s + (now − receivedAt). */
  receivedAt: number;
}

export function fetchBalanceLive(plantId: number, signal?: AbortSignal): Promise<BalanceLive> {
  return api<Omit<BalanceLive, 'receivedAt'>>(paths.balanceLive(plantId), { signal }).then((r) => ({ ...r, receivedAt: Date.now() }));
}

export const balanceLiveQuery = (plantId: number) =>
  queryOptions({
    queryKey: ['plants', plantId, 'balance', 'live'],
    queryFn: ({ signal }) => fetchBalanceLive(plantId, signal),
    // The stream keeps it fresh; a slow poll covers a stream that is down.
    staleTime: 30_000,
    refetchInterval: 60_000,
  });

export function useBalanceLive(plantId: number | null) {
  return useQuery({ ...balanceLiveQuery(plantId ?? 0), enabled: plantId !== null });
}
