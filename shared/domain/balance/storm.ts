/**
 * Storm projection of the live balance (design §3 item 4): the storm flow of the plant and, per
 * train, stormProjection (shared/domain/storm.ts) at the train's share of it.
 */
import type { BalanceData } from '../../contracts/balance.js';
import { combineQuality, estimated, fromFigures, good, propagate, unavailable, withUnit, type Figure } from '../quality.js';
import { stormProjection, type StormCheckSettings, type StormProjection } from '../storm.js';
import { seriesMean, type MinuteSeries } from './series.js';

export type TrainStormOut = BalanceData['trains'][number]['storm'];
export type StormSource = BalanceData['storm']['source'];

/**
 * Storm flow of the plant [m³/h]: its peak wet-weather flow when set (good); otherwise
 * `factor` × the mean influent over the history given (setting storm.peak_flow_factor,
 * estimated and said so); unavailable without either.
 */
export function stormPeakFlow(peakFlow_m3h: number | null, influentHistory: MinuteSeries, factor: number, window_h: number): { peak: Figure<number>; source: StormSource } {
  if (peakFlow_m3h !== null && peakFlow_m3h > 0) return { peak: good(peakFlow_m3h), source: 'plant' };
  const mean = seriesMean(influentHistory);
  if (mean === null) return { peak: unavailable('plant has no peak wet-weather flow and there is no influent history to take the setting default from'), source: 'none' };
  const hours = (influentHistory.size * 60_000) / 3_600_000;
  const span = hours < window_h ? `${hours.toFixed(1)} h` : `${window_h} h`;
  return {
    peak: estimated(factor * mean, `plant has no peak wet-weather flow set: storm flow taken as ${factor} × the ${span} mean influent ${mean.toFixed(0)} m3/h (setting storm.peak_flow_factor)`),
    source: 'setting',
  };
}

/**
 * A train's share of the storm flow [-]: its share of the measured influent when every train's
 * is known and positive, else its share of the aeration volume.
 */
export function stormShare(trainInfluent: Figure<number>, allInfluents: readonly Figure<number>[], volume_m3: number, totalVolume_m3: number): number {
  const known = allInfluents.every((f) => f.value !== null);
  const sum = known ? allInfluents.reduce((a, f) => a + (f.value as number), 0) : null;
  return sum && sum > 0 && trainInfluent.value !== null ? trainInfluent.value / sum : volume_m3 / totalVolume_m3;
}

export interface TrainStormInputs {
  trainCode: string;
  influentFlow_m3h: Figure<number>;
  rasFlow_m3h: Figure<number>;
  mlss_gL: Figure<number>;
  svi_mLg: Figure<number>;
  /** The train's storm flow (plant storm flow × share) [m³/h]. */
  stormFlow_m3h: Figure<number>;
  /** Sludge in the train's clarifiers now [kg]; unknown is taken as 0 (estimated, said so). */
  clarifierMass_kg: Figure<number>;
  aerationVolume_m3: number;
  clarifierArea_m2: number;
  xrFactor: number;
  checks: StormCheckSettings;
}

/** stormProjection for one train, every figure carrying the quality of its inputs. */
export function trainStorm(inp: TrainStormInputs): TrainStormOut {
  const { influentFlow_m3h: q, rasFlow_m3h: qr, mlss_gL: x, svi_mLg: svi, stormFlow_m3h: qs } = inp;
  const m0 = inp.clarifierMass_kg.value !== null ? inp.clarifierMass_kg : estimated(0, ...inp.clarifierMass_kg.reasons, `${inp.trainCode}: clarifier mass unknown, taken as 0 (stored fraction understated)`);
  const ins = [q, qr, x, svi, qs, m0];
  let storm: Figure<StormProjection> = unavailable(...combineQuality(...ins).reasons);
  if (ins.every((f) => f.value !== null)) {
    storm = propagate(
      stormProjection({
        influentFlow_m3h: q.value!,
        rasFlow_m3h: qr.value!,
        mlss_gL: x.value!,
        svi_mLg: svi.value!,
        aerationVolume_m3: inp.aerationVolume_m3,
        clarifierArea_m2: inp.clarifierArea_m2,
        stormFlow_m3h: qs.value!,
        xrFactor: inp.xrFactor,
        clarifierMass_kg: m0.value!,
        checks: inp.checks,
      }),
      ...ins,
    );
  }
  const pick = (f: (p: StormProjection) => number, unit: string) =>
    withUnit(storm.value === null ? unavailable(...storm.reasons) : { value: f(storm.value), quality: storm.quality, reasons: storm.reasons }, unit);
  return {
    stormFlow_m3h: withUnit(qs, 'm3/h'),
    equilibriumMlss_gL: pick((p) => p.equilibriumMlss_gL, 'g/L'),
    sludgeToClarifiers_kg: pick((p) => p.sludgeToClarifiers_kg, 'kg'),
    blanketRise_m: pick((p) => p.blanketRise_m, 'm'),
    storedFraction: pick((p) => p.storedFraction, '-'),
    checks: storm.value?.checks ?? [],
  };
}

/** The train's storm flow: plant storm flow × share [m³/h]. */
export function trainStormFlow_m3h(peak: Figure<number>, share: number): Figure<number> {
  return fromFigures([peak], (p) => p * share);
}
