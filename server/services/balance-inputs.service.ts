import type { BalanceRepository } from '../repositories/balance.repository.ts';
import type { labRepository } from '../repositories/lab.repository.ts';
import type { LabSettlingTest } from '../../shared/domain/settling-fit.ts';
import type { EffectiveSettings } from '../../shared/contracts/settings.ts';
import type { BalanceEngineInputs } from '../../shared/domain/balance/inputs.ts';
import type { OperatingSettlingService } from './operating-settling.service.ts';

type LabList = Pick<ReturnType<typeof labRepository>, 'list'>;

/**
 * Gathers what computeBalance needs for one plant: the layout valid at the plant clock, latest value of every mapped signal,
 * rollup_1m series over the longest window any figure uses (ending at the plant clock, the
 * newest sample time — see shared/domain/balance/signals.ts on the two clocks), the latest SVI/DSVI and the
 * newest receive time, (given the lab repository) the settleability tests of the Vesilind fit
 * window and (given the operating-settling service) the fit to the stable-blanket hours of
 * settling.operating_window_d before the plant clock, which that service keeps between calls.
 * Returns null for an unknown plant.
 */
export async function readBalanceInputs(
  repo: BalanceRepository,
  plantId: number,
  s: EffectiveSettings,
  now_ms: number,
  deps: { lab?: LabList; operating?: Pick<OperatingSettlingService, 'fit'> } = {},
): Promise<BalanceEngineInputs | null> {
  const { lab, operating } = deps;
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
  const settlingTests = lab ? await readSettlingTests(lab, plantId, new Date(now_ms - s['settling.fit_window_d'] * 86_400_000)) : [];
  const operatingFit = operating ? await operating.fit({ layout, readings }, clock, s['settling.operating_window_d']) : undefined;
  return { now_ms, layout, readings, series, svi: sviOk, lastReceived_ms, settlingTests, ...(operatingFit ? { operatingFit } : {}) };
}

/** The plant's SVI, DSVI and SSVI tests since `from` with their readings as entered (lab_results.details). */
async function readSettlingTests(lab: LabList, plantId: number, from: Date): Promise<LabSettlingTest[]> {
  const kinds = ['SVI', 'DSVI', 'SSVI'] as const;
  const rows = (await Promise.all(kinds.map((kind) => lab.list(plantId, { kind, from }, 2000)))).flat();
  return rows.flatMap((r) => {
    const d = r.details as { settledVolume_mLL?: unknown; mlss_gL?: unknown; dilutionFactor?: unknown };
    if (typeof d.settledVolume_mLL !== 'number' || typeof d.mlss_gL !== 'number') return [];
    const kind = r.kind as LabSettlingTest['kind'];
    return [{ kind, settledVolume_mLL: d.settledVolume_mLL, mlss_gL: d.mlss_gL, ...(typeof d.dilutionFactor === 'number' ? { dilutionFactor: d.dilutionFactor } : {}), sampledAt_ms: r.sampledAt.getTime() }];
  });
}
