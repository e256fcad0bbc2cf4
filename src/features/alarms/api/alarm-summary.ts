import { useQuery } from '@tanstack/react-query';
import type { AlarmSummaryOut } from '../../../../shared/contracts/alarm.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';
import { alarmsKey } from './alarms.ts';

/** `GET /plants/:plantId/alarms/summary`: alarms annunciated per 10 minutes over the last 6 h, with the flood flag. */
export function useAlarmSummary(plantId: number | null) {
  return useQuery({
    queryKey: [...alarmsKey(plantId ?? 0), 'summary'],
    queryFn: ({ signal }) => api<AlarmSummaryOut>(`${paths.alarms(plantId ?? 0)}/summary`, { signal }),
    enabled: plantId !== null,
    staleTime: 30_000,
    refetchInterval: 60_000,
  });
}
