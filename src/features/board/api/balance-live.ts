import { queryOptions, useQuery } from '@tanstack/react-query';
import type { z } from 'zod';
import type { Balance } from '../../../../shared/contracts/balance.ts';
import type { balanceLiveResponse } from '../../../../shared/contracts/plant-api.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/**
 * `GET /plants/:id/balance/live`: the latest balance, or null with the server's reason. The wire
 * contract types `data` and `inputs` loosely (records); their shape is the engine's
 * (shared/contracts/balance.ts), so the balance is read as that.
 */
export type BalanceLive = Omit<z.output<typeof balanceLiveResponse>, 'balance'> & {
  balance: Balance | null;
  /** Client clock when this answer arrived [epoch ms]; age now = age_s + (now − receivedAt). */
  receivedAt: number;
};

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
