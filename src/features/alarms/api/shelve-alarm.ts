import { useMutation, useQueryClient } from '@tanstack/react-query';
import type { z } from 'zod';
import type { alarmShelveRequest } from '../../../../shared/contracts/alarm.ts';
import type { AlarmOut } from '../../../../shared/contracts/plant-api.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';
import { alarmsKey } from './alarms.ts';

export type AlarmShelveRequest = z.output<typeof alarmShelveRequest>;

/** `POST /alarms/:alarmId/shelve` (operator and up; ISA-18.2 shelving with expiry, audited by the server). */
export function postAlarmShelve(alarmId: number, body: AlarmShelveRequest): Promise<AlarmOut> {
  return api<AlarmOut>(paths.alarmShelve(alarmId), { method: 'POST', body });
}

/** `POST /alarms/:alarmId/unshelve` (operator and up; ends the shelf early, audited). */
export function postAlarmUnshelve(alarmId: number): Promise<AlarmOut> {
  return api<AlarmOut>(paths.alarmUnshelve(alarmId), { method: 'POST', body: {} });
}

export function useShelveAlarm(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: ({ alarmId, body }: { alarmId: number; body: AlarmShelveRequest }) => postAlarmShelve(alarmId, body),
    onSettled: () => qc.invalidateQueries({ queryKey: alarmsKey(plantId) }),
  });
}

export function useUnshelveAlarm(plantId: number) {
  const qc = useQueryClient();
  return useMutation({
    mutationFn: ({ alarmId }: { alarmId: number }) => postAlarmUnshelve(alarmId),
    onSettled: () => qc.invalidateQueries({ queryKey: alarmsKey(plantId) }),
  });
}
