import { useQueryClient } from '@tanstack/react-query';
import { balanceOut } from '../../../../shared/contracts/balance.ts';
import { usePlantStream, type StreamState } from '../../../lib/stream.ts';
import { alarmsKey } from '../../alarms/api/alarms.ts';
import { balanceLiveQuery, type BalanceLive } from '../api/balance-live.ts';

/**
 * Keeps the board current from one plant stream (balance and alarm events; the server caps
 * streams per user, so the board opens one). An event that carries the whole balance
 * (in-process publish) is written straight into the cache; the cross-process event is a headline
 * only (pg_notify payloads are capped at 8000 bytes), so a newer id refetches the balance.
 * TanStack Query's structural sharing keeps unchanged parts of the balance referentially equal,
 * so memoised panels whose figures did not change do not re-render. Alarm events refresh the
 * alarm lists that flag figures.
 */
export function useLiveBalance(plantId: number | null): StreamState {
  const qc = useQueryClient();
  return usePlantStream(plantId, ['balance', 'alarm'], (event, data) => {
    if (plantId === null) return;
    if (event === 'alarm') {
      void qc.invalidateQueries({ queryKey: alarmsKey(plantId) });
      return;
    }
    const key = balanceLiveQuery(plantId).queryKey;
    const full = balanceOut.safeParse(data);
    if (full.success) {
      qc.setQueryData<BalanceLive>(key, { plantId, balance: full.data, age_s: Math.max(0, (Date.now() - Date.parse(full.data.ts)) / 1000), receivedAt: Date.now() });
      return;
    }
    const id = (data as { id?: unknown } | null)?.id;
    const current = qc.getQueryData<BalanceLive>(key)?.balance?.id;
    if (typeof id !== 'number' || id !== current) void qc.invalidateQueries({ queryKey: key, exact: true });
  });
}
