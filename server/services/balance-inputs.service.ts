import type { BalanceRepository } from '../repositories/balance.repository.ts';
import type { EffectiveSettings } from '../../shared/contracts/settings.ts';
import type { BalanceEngineInputs } from '../../shared/domain/balance/inputs.ts';

/**
 * Gathers what computeBalance needs for one plant: the layout valid at the plant clock, latest value of every mapped signal,
 * rollup_1m series over the longest window any figure uses (ending at the plant clock, the
 * newest sample time — see shared/domain/balance/signals.ts on the two clocks), the latest SVI/DSVI and the
 * newest receive time. Returns null for an unknown plant.
 */
export async function readBalanceInputs(repo: BalanceRepository, plantId: number, s: EffectiveSettings, now_ms: number): Promise<BalanceEngineInputs | null> {
  const [readings, svi, lastReceived_ms] = await Promise.all([repo.readings(plantId), repo.latestSvi(plantId), repo.lastReceived(plantId)]);
  const seen = readings.flatMap((r) => (r.ts_ms === null ? [] : [r.ts_ms]));
  const clock = seen.length ? Math.max(...seen) : now_ms;
  // The geometry that held at the time the balance describes (the plant clock), so recomputing
  // history uses the volumes and areas of then.
  const layout = await repo.layoutAt(plantId, new Date(clock));
  if (!layout) return null;
  const window_ms = Math.max(s['srt.window_h'] * 3_600_000, s['clarifier.integral_window_h'] * 3_600_000, s['alarm.blanket_rate_window_min'] * 60_000) + 60_000;
  const series = await repo.series([...new Set(readings.map((r) => r.tagId))], new Date(clock - window_ms), new Date(clock));
  // Lab SVI units: mL/g is the only one the engine takes; anything else is left out with the engine's 'no SVI' reason.
  const sviOk = svi && /^m[lL]\/g$/.test(svi.unit.trim()) ? { kind: svi.kind, value_mLg: svi.value_mLg, sampledAt_ms: svi.sampledAt_ms, flags: svi.flags } : null;
  return { now_ms, layout, readings, series, svi: sviOk, lastReceived_ms };
}
