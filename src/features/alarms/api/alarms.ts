import { queryOptions, useQuery } from '@tanstack/react-query';
import type { z } from 'zod';
import type { AlarmOut, alarmsResponse } from '../../../../shared/contracts/plant-api.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

export type AlarmStateName = AlarmOut['state'];
type AlarmsResponse = z.output<typeof alarmsResponse>;

/** Rows per state the view asks for: all active alarms, and the newest cleared ones for the history. */
const LIMIT: Record<AlarmStateName, number> = { raised: 1000, acknowledged: 1000, cleared: 200 };

export function fetchAlarms(plantId: number, state: AlarmStateName, signal?: AbortSignal): Promise<AlarmsResponse> {
  return api<AlarmsResponse>(paths.withQuery(paths.alarms(plantId), { state, limit: LIMIT[state] }), { signal });
}

/** Every alarm query of a plant shares this prefix, so one invalidation refreshes them all. */
export const alarmsKey = (plantId: number) => ['plants', plantId, 'alarms'] as const;

export const alarmsQuery = (plantId: number, state: AlarmStateName) =>
  queryOptions({
    queryKey: [...alarmsKey(plantId), state],
    queryFn: ({ signal }) => fetchAlarms(plantId, state, signal),
    staleTime: 30_000,
    refetchInterval: 60_000,
  });

export function useAlarms(plantId: number | null, state: AlarmStateName) {
  return useQuery({ ...alarmsQuery(plantId ?? 0, state), enabled: plantId !== null });
}
