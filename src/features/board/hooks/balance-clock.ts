import { createContext, useContext } from 'react';
import { useNow } from './use-now.ts';

/** When the shown balance was computed, on the client's clock [epoch ms]; null: no balance. */
export const BalanceClock = createContext<number | null>(null);

/** Age of the shown balance now [s]. */
export function useBalanceAge(): number | null {
  const at = useContext(BalanceClock);
  const now = useNow();
  return at === null ? null : Math.max(0, (now - at) / 1000);
}
