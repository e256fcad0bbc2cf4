import { useMutation, useQueryClient } from '@tanstack/react-query';
import type { AlarmOut } from '../../../../shared/contracts/plant-api.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';
import { alarmsKey } from './alarms.ts';

/** `POST /plants/:plantId/alarms/:alarmId/ack` (operator and up; audited by the server). */
export function postAlarmAck(plantId: number, alarmId: number, comment?: string): Promise<AlarmOut> {
  return api<AlarmOut>(paths.alarmAck(plantId, alarmId), { method: 'POST', body: comment ? { comment } : {} });
}

export function useAckAlarm(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: ({ alarmId, comment }: { alarmId: number; comment?: string }) => postAlarmAck(plantId, alarmId, comment),
    onSettled: () => qc.invalidateQueries({ queryKey: alarmsKey(plantId) }),
  });
}
