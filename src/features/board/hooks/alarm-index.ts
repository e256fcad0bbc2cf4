import { createContext, useContext } from 'react';
import type { AlarmOut } from '../../../../shared/contracts/plant-api.ts';

/**
 * Active alarms of the plant by `rule|target`. The board marks a figure abnormal only when the
 * alarm system says so, so the board and the alarm list can never disagree on a limit.
 */
export const AlarmIndex = createContext<ReadonlyMap<string, AlarmOut>>(new Map());

export const alarmKey = (rule: string, target: string) => `${rule}|${target}`;

export function useActiveAlarm(rule: string | undefined, target: string | undefined): AlarmOut | undefined {
  const index = useContext(AlarmIndex);
  return rule && target ? index.get(alarmKey(rule, target)) : undefined;
}
