/**
 * RAS margins of a train (design §3 items 1–3) with the maximum return concentration from the
 * latest SVI by the rule of thumb X_R,max = factor/SVI (common practice of the trade [CP]).
 */
import type { BalanceData } from '../../contracts/balance.js';
import { rasConcMaxRuleOfThumb_gL } from '../flux.js';
import { combineQuality, propagate, unavailable, withUnit, type Figure } from '../quality.js';
import { rasMargin } from '../ras-margin.js';

/** The margins of a train's `ras`; the two X_R,max it was chosen from are added by the assembly. */
export type TrainRasOut = Omit<BalanceData['trains'][number]['ras'], 'rasConcMaxRule_gL' | 'rasConcMaxFlux_gL'>;

/** X_R,max = factor/SVI [g/L] (rasConcMaxRuleOfThumb_gL), carrying the SVI's quality. */
export function rasConcMaxFromSvi_gL(svi: Figure<number>, xrFactor: number): Figure<number> {
  return svi.value === null ? svi : propagate(rasConcMaxRuleOfThumb_gL(svi.value, xrFactor), svi);
}

export interface TrainRasInputs {
  influentFlow_m3h: Figure<number>;
  rasFlow_m3h: Figure<number>;
  mlss_gL: Figure<number>;
  rasConcMax_gL: Figure<number>;
  /** Installed capacity of the train's RAS pumps [m³/h]. */
  rasPumpCapacity_m3h: number;
}

/**
 * The RAS figures of a train with rasMargin (shared/domain/ras-margin.ts): required X_R,
 * concentration and pump margins, R_min, Q_R,min and the influent flows at which each margin
 * is used up. Every figure carries the quality of Q, Q_R, X and X_R,max; when any of them is
 * unavailable all figures are, with the reasons.
 */
export function trainRasMargins(inp: TrainRasInputs): TrainRasOut {
  const { influentFlow_m3h: q, rasFlow_m3h: qr, mlss_gL: x, rasConcMax_gL: xrMax } = inp;
  const measured = [q, qr, x];
  const m =
    measured.every((f) => f.value !== null) && xrMax.value !== null
      ? rasMargin({ influentFlow_m3h: q.value!, rasFlow_m3h: qr.value!, mlss_gL: x.value!, rasConcMax_gL: xrMax.value, rasPumpCapacity_m3h: inp.rasPumpCapacity_m3h, rasConcMaxQuality: xrMax })
      : null;
  const missing = combineQuality(...measured, xrMax);
  const out = (f: Figure<number> | undefined, unit: string) => withUnit(f ? propagate(f, ...measured) : unavailable(...missing.reasons), unit);
  return {
    rasConcMax_gL: withUnit(xrMax, 'g/L'),
    requiredRasConc_gL: out(m?.requiredRasConc_gL, 'g/L'),
    concentrationMargin: out(m?.concentrationMargin, '-'),
    minRecycleRatio: out(m?.minRecycleRatio, '-'),
    minRasFlow_m3h: out(m?.minRasFlow_m3h, 'm3/h'),
    pumpMargin: out(m?.pumpMargin, '-'),
    concentrationLimitFlow_m3h: out(m?.concentrationLimitFlow_m3h, 'm3/h'),
    pumpLimitFlow_m3h: out(m?.pumpLimitFlow_m3h, 'm3/h'),
  };
}
