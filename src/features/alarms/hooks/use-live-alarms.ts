import { useQueryClient } from '@tanstack/react-query';
import { usePlantStream, type StreamState } from '../../../lib/stream.ts';
import { alarmsKey } from '../api/alarms.ts';

/** Any alarm event on the plant stream (raised, acknowledged, cleared) refreshes the alarm lists. */
export function useLiveAlarms(plantId: number | null): StreamState {
  const qc = useQueryClient();
  return usePlantStream(plantId, ['alarm'], () => {
    if (plantId !== null) void qc.invalidateQueries({ queryKey: alarmsKey(plantId) });
  });
}
