/**
 * Flows of a train as the balance uses them: the train influent Q and the effluent flow
 * Q_e = Q − Q_W (design §3 symbols), in m³/h.
 */
import { estimated, fromFigures, propagate, sumFigures, type Figure } from '../quality.js';
import { joinSeries, type MinuteSeries } from './series.js';

/**
 * Train influent Q [m³/h]: the sum of the train's basin influent meters; when they are missing
 * or unavailable, the plant influent meter split by the train's share of the aeration volume
 * (estimated, said so — a split by volume assumes trains fed in proportion to their size).
 */
export function trainInfluentFlow(basinFlows: readonly Figure<number>[], plantInfluent: Figure<number>, volumeShare: number, trainCode: string): Figure<number> {
  const q = sumFigures(basinFlows, `basin influent meters in ${trainCode}`);
  if (q.value !== null || plantInfluent.value === null) return q;
  return propagate(estimated(plantInfluent.value * volumeShare, `${trainCode}: basin influent not measured; plant influent split by basin volume`), plantInfluent);
}

/** Effluent flow Q_e = max(0, Q − Q_W) [m³/h] (design §3: Q_e = Q − Q_W; a WAS flow above the influent leaves no effluent). */
export function effluentFlow_m3h(influent: Figure<number>, was: Figure<number>): Figure<number> {
  return fromFigures([influent, was], (q, qw) => Math.max(0, q - qw));
}

/** {@link effluentFlow_m3h} bucket by bucket. */
export function effluentFlowSeries(influent: MinuteSeries, was: MinuteSeries): MinuteSeries {
  return joinSeries([influent, was], ([q, qw]) => Math.max(0, q! - qw!));
}
