/**
 * Storm projection of the live balance (design §3 item 4): the storm flow of the plant and, per
 * train, stormProjection (shared/domain/storm.ts) at the train's share of it.
 */
import type { BalanceData } from '../../contracts/balance.js';
import { combineQuality, estimated, fromFigures, good, propagate, unavailable, withUnit, type Figure } from '../quality.js';
import { stormProjection, type StormCheckSettings, type StormProjection } from '../storm.js';
import { stormTimeline, type HydrographPoint } from '../storm-timeline.js';
import { seriesMean, type MinuteSeries } from './series.js';

export type TrainStormOut = Omit<BalanceData['trains'][number]['storm'], 'timeline'>;
export type TrainStormTimelineOut = BalanceData['trains'][number]['storm']['timeline'];
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

/** What both storm figures of a train start from: its state now and its share of the storm flow. */
export interface TrainStormBase {
  trainCode: string;
  influentFlow_m3h: Figure<number>;
  rasFlow_m3h: Figure<number>;
  mlss_gL: Figure<number>;
  svi_mLg: Figure<number>;
  /** The train's storm (peak) flow: plant storm flow × share [m³/h]. */
  stormFlow_m3h: Figure<number>;
  /** Sludge in the train's clarifiers now [kg]; unknown is taken as 0 (estimated, said so). */
  clarifierMass_kg: Figure<number>;
  aerationVolume_m3: number;
  clarifierArea_m2: number;
  checks: StormCheckSettings;
}

export interface TrainStormInputs extends TrainStormBase {
  xrFactor: number;
  /** Highest blanket level now [m] and the shallowest side-water depth [m]: a rise that would lift the blanket above the surface is never good. */
  blanketNow_m?: Figure<number>;
  clarifierDepth_m?: number;
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
  const level = inp.blanketNow_m?.value ?? 0;
  if (storm.value && inp.clarifierDepth_m !== undefined && level + storm.value.blanketRise_m >= inp.clarifierDepth_m) {
    storm = propagate(storm, {
      quality: 'estimated',
      reasons: [`${inp.trainCode}: the blanket would rise to ${(level + storm.value.blanketRise_m).toFixed(2)} m, above the clarifier surface (${inp.clarifierDepth_m} m): sludge would leave with the effluent, so the clarifiers cannot hold this equilibrium`],
    });
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

export interface TrainStormTimelineInputs extends TrainStormBase {
  /** The design storm: flow = present + peakFraction × (peak − present) (setting storm.hydrograph). */
  hydrograph: readonly { t_h: number; peakFraction: number }[];
  /** X_R,max the RAS margins use (the lower of the rule and flux theory) [g/L]. */
  rasConcMax_gL: Figure<number>;
  /** Highest blanket level of the train's clarifiers now [m]; unknown is left out (estimated, said so). */
  blanketNow_m: Figure<number>;
  /** Shallowest side-water depth of the train's clarifiers [m]. */
  clarifierDepth_m: number;
}

/**
 * The plant's design storm in time for one train (stormTimeline): the hydrograph of the setting
 * scaled between the present flow and the train's storm peak, X_R,max the lower of the rule and
 * flux theory, the blanket from the highest present level against the shallowest clarifier.
 * Carries the quality of its inputs; unavailable with their reasons when one is missing.
 */
export function trainStormTimeline(inp: TrainStormTimelineInputs): TrainStormTimelineOut {
  const ins = [inp.influentFlow_m3h, inp.rasFlow_m3h, inp.mlss_gL, inp.svi_mLg, inp.stormFlow_m3h, inp.rasConcMax_gL];
  const m0 = inp.clarifierMass_kg.value !== null ? inp.clarifierMass_kg : estimated(0, ...inp.clarifierMass_kg.reasons, `${inp.trainCode}: clarifier mass unknown, taken as 0`);
  const empty = (q: Figure<unknown>): TrainStormTimelineOut => ({
    points: [],
    peakBlanket_m: withUnit(unavailable(...q.reasons), 'm'),
    blanketReachesSurface_h: null,
    firstFailure_h: null,
    firstFailedRule: null,
    checks: [],
    quality: 'unavailable',
    reasons: [...q.reasons],
  });
  if (ins.some((f) => f.value === null)) return empty(unavailable(...combineQuality(...ins).reasons));
  const q = inp.influentFlow_m3h.value!;
  const peak = inp.stormFlow_m3h.value!;
  const hydrograph: HydrographPoint[] = inp.hydrograph.map((p) => ({ t_h: p.t_h, flow_m3h: q + p.peakFraction * Math.max(0, peak - q) }));
  const blanket = inp.blanketNow_m.value;
  const r = stormTimeline({
    influentFlow_m3h: q,
    rasFlow_m3h: inp.rasFlow_m3h.value!,
    mlss_gL: inp.mlss_gL.value!,
    svi_mLg: inp.svi_mLg.value!,
    aerationVolume_m3: inp.aerationVolume_m3,
    clarifierArea_m2: inp.clarifierArea_m2,
    hydrograph,
    clarifierDepth_m: inp.clarifierDepth_m,
    ...(blanket !== null ? { blanketNow_m: Math.min(blanket, inp.clarifierDepth_m) } : {}),
    clarifierMass_kg: m0.value!,
    rasConcMax_gL: inp.rasConcMax_gL.value!,
    checks: inp.checks,
  });
  const fig = propagate(r, ...ins, m0, ...(blanket !== null ? [inp.blanketNow_m] : []));
  const v = fig.value;
  if (!v) return empty(fig);
  const failed = v.checks.filter((c) => c.firstFailed_h !== null).sort((a, b) => a.firstFailed_h! - b.firstFailed_h!)[0];
  return {
    points: v.points,
    peakBlanket_m: withUnit({ value: v.peakBlanket_m, quality: fig.quality, reasons: fig.reasons }, 'm'),
    blanketReachesSurface_h: v.blanketReachesSurface_h,
    firstFailure_h: v.firstFailure_h,
    firstFailedRule: failed?.rule ?? null,
    checks: v.checks,
    quality: fig.quality,
    reasons: [...fig.reasons],
  };
}
