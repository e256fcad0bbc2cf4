/**
 * Sludge age of the live balance (design §3 item 5): the rolling SRT over the window from the
 * trains' measured series (rollingSrt), the dynamic SRT on the age balance (dynamicSrt),
 * and the WAS flow that holds the target SRT (wasFlowForTargetSrt_m3h), plant totals of the trains.
 */
import { combineQuality, estimated, fromFigures, propagate, sumFigures, unavailable, type Figure, type Quality } from '../quality.js';
import { aerobicMassFraction, dynamicSrt, EFFLUENT_TSS_NOT_MEASURED, rollingSrt, wasFlowForTargetSrt_m3h } from '../srt.js';
import type { LayoutIn } from './inputs.js';
import { effluentFlow_m3h } from './flows.js';
import { joinSeries, sumSeries, toTimeSeries, type MinuteSeries } from './series.js';

/** One train's minute series over the SRT window, in base units. */
export interface TrainSrtSeries {
  /** ΣXᵢVᵢ of the train's basins [kg]. */
  aerationMass_kg: MinuteSeries;
  /** ΣXᵢVᵢfᵢ, the aerated part of it (fᵢ the basin's aerated fraction) [kg]; the whole basin mass when omitted. */
  aerobicMass_kg?: MinuteSeries;
  /** Blanket mass of the train's clarifiers [kg]. */
  clarifierMass_kg: MinuteSeries;
  /** Σ WAS pump flows Q_W [m³/h]. */
  wasFlow_m3h: MinuteSeries;
  /** X_W: the underflow TSS, mean over the train's clarifiers [g/L]. */
  wasTss_gL: MinuteSeries;
  /** Q_e = max(0, Q − Q_W) [m³/h]. */
  effluentFlow_m3h: MinuteSeries;
  /** X_e, mean over the train's clarifiers [g/L]; null when not measured. */
  effluentTss_gL: MinuteSeries | null;
}

/** Plant inventory series: aeration plus clarifier mass of all trains, minute by minute [kg]. */
export function plantMassSeries(trains: readonly TrainSrtSeries[]): { aeration_kg: MinuteSeries; clarifier_kg: MinuteSeries; total_kg: MinuteSeries } {
  const aeration_kg = sumSeries(trains.map((t) => t.aerationMass_kg));
  const clarifier_kg = sumSeries(trains.map((t) => t.clarifierMass_kg));
  return { aeration_kg, clarifier_kg, total_kg: sumSeries([aeration_kg, clarifier_kg]) };
}

/** Solids leaving the plant Σ(Q_W·X_W + Q_e·X_e) minute by minute [kg/h]; X_e taken as 0 where not measured. */
export function solidsLossSeries(trains: readonly TrainSrtSeries[]): MinuteSeries {
  return sumSeries(
    trains.map((t) =>
      joinSeries(t.effluentTss_gL ? [t.wasFlow_m3h, t.wasTss_gL, t.effluentFlow_m3h, t.effluentTss_gL] : [t.wasFlow_m3h, t.wasTss_gL, t.effluentFlow_m3h], ([qw, xw, qe, xe]) => qw! * xw! + qe! * (xe ?? 0)),
    ),
  );
}

/** True when some train has no effluent TSS series (its effluent solids are taken as 0). */
export function effluentTssMissing(trains: readonly TrainSrtSeries[]): boolean {
  return trains.some((t) => t.effluentTss_gL === null);
}

/**
 * Rolling SRT of the plant over the window ending at the plant clock (rollingSrt): the trains'
 * aeration and clarifier masses summed minute by minute, each train one solids outlet with its
 * measured Q_W, X_W, Q_e and X_e series; and the aerobic SRT, the aerated basin mass
 * Σ(Vᵢ·Xᵢ·fᵢ) over the same removal (mass basis, see aerobicMassFraction).
 */
export function plantRollingSrt(trains: readonly TrainSrtSeries[], end_ms: number, window_h: number) {
  const mass = plantMassSeries(trains);
  const outlets = trains.map((t) => ({
    wasFlow_m3h: toTimeSeries(t.wasFlow_m3h),
    wasTss_gL: toTimeSeries(t.wasTss_gL),
    effluentFlow_m3h: toTimeSeries(t.effluentFlow_m3h),
    ...(t.effluentTss_gL ? { effluentTss_gL: toTimeSeries(t.effluentTss_gL) } : {}),
  }));
  const rolling = rollingSrt({ aerationMass_kg: toTimeSeries(mass.aeration_kg), clarifierMass_kg: toTimeSeries(mass.clarifier_kg), outlets, end_ms, window_h });
  // Aerobic SRT: the same window and outlets with only the aerated basin mass Σ(Vᵢ·Xᵢ·fᵢ) as inventory (aerobicMassFraction's basis).
  const aerobicMass = sumSeries(trains.map((t) => t.aerobicMass_kg ?? t.aerationMass_kg));
  const aerobic_d = rollingSrt({ aerationMass_kg: toTimeSeries(aerobicMass), outlets, end_ms, window_h }).aeration_d;
  return { ...rolling, aerobic_d };
}

/**
 * The aerobic SRT of the balance: the rolling aerobic SRT (plantRollingSrt) and the present
 * aerobic share of the basin mass Σ(Vᵢ·Xᵢ·fᵢ)/Σ(Vᵢ·Xᵢ) (aerobicMassFraction), each saying which
 * basins had no aerated fraction in the plant model and were taken as fully aerated.
 */
export function plantAerobicSrt(rolling_d: Figure<number>, layout: LayoutIn, basins: readonly { code: string; volume_m3: number; mlss_gL: { value: number | null; quality: Quality; reasons: string[] } }[]): { srt_d: Figure<number>; fraction: Figure<number> } {
  const all = layout.trains.flatMap((t) => t.basins);
  const unset = all.filter((b) => b.aeratedFraction === undefined).map((b) => b.code);
  const note = unset.length ? [`aerated fraction not set in the plant model for ${unset.join(', ')}: taken as fully aerated`] : [];
  const withNote = (f: Figure<number>): Figure<number> => ({ ...f, reasons: [...f.reasons, ...note] });
  const mlss = basins.map((b) => b.mlss_gL);
  const fraction =
    mlss.some((x) => x.value === null)
      ? unavailable<number>(...combineQuality(...mlss).reasons)
      : propagate(aerobicMassFraction(all.map((b, i) => ({ volume_m3: b.volume_m3, mlss_gL: mlss[i]!.value!, aeratedFraction: b.aeratedFraction ?? 1 }))), ...mlss);
  return { srt_d: withNote(rolling_d), fraction: withNote(fraction) };
}

/**
 * Dynamic SRT at the end of the window (dynamicSrt: the age balance d(M·θ)/dt = M − W·θ, after
 * Takács et al. 2008 [M]) from what the engine measures: the inventory M minute by minute and
 * the solids removal W = Σ(Q_W·X_W + Q_e·X_e). The production P = W + dM/dt is implied by the
 * inventory's change (passing W where the age needs P read the age high while the inventory
 * built up). Integrated over the minutes with both M and W, from the steady-state age M/W at
 * the first of them. Estimated always (the start age is assumed), unavailable with fewer than
 * two minutes; `effluentMissing` adds the reason that effluent solids were taken as 0.
 */
export function plantDynamicSrt(mass_kg: MinuteSeries, removal_kgh: MinuteSeries, window_h: number, effluentMissing: boolean): Figure<number> {
  const samples = [...mass_kg]
    .filter(([t]) => removal_kgh.has(t))
    .map(([ts_ms, m]) => ({ ts_ms, mass_kg: m, removal_kgh: removal_kgh.get(ts_ms)! }))
    .sort((a, b) => a.ts_ms - b.ts_ms);
  if (samples.length < 2) return unavailable(`fewer than two complete minutes of inventory and wasting in the ${window_h} h window`);
  const d = dynamicSrt(samples);
  const last = d.value?.[d.value.length - 1];
  if (last === undefined) return unavailable(...d.reasons);
  const span_h = (samples[samples.length - 1]!.ts_ms - samples[0]!.ts_ms) / 3_600_000;
  const f = estimated(last.srt_d, ...d.reasons, `age balance integrated over ${span_h.toFixed(1)} h from the steady-state age M/W at the window start (after Takács et al. 2008 [M])`);
  return effluentMissing && f.value !== null ? propagate(f, { quality: 'estimated', reasons: [EFFLUENT_TSS_NOT_MEASURED] }) : f;
}

/** The present figures of one train the WAS advice needs. */
export interface TrainWasInputs {
  influentFlow_m3h: Figure<number>;
  wasFlow_m3h: Figure<number>;
  /** Underflow TSS X_R, which is the WAS concentration X_W [g/L]. */
  rasConc_gL: Figure<number>;
  effluentTss_gL: Figure<number>;
}

/**
 * WAS advice (design §3 item 5) from the present totals: Q_W = (M/(SRT_target·24) − Q_e·X_e)/X_W
 * (wasFlowForTargetSrt_m3h) with M the total inventory, Q_e = Σ max(0, Q − Q_W) over the trains,
 * X_e the effluent-flow-weighted and X_W the WAS-flow-weighted mean of the trains (the plain
 * mean while no WAS pump runs). Also returns the present total WAS flow.
 */
export function wasAdvice(trains: readonly TrainWasInputs[], totalMass_kg: Figure<number>, target_d: number): { wasAdvice_m3h: Figure<number>; wasFlow_m3h: Figure<number> } {
  const wasFlow_m3h = sumFigures(trains.map((t) => t.wasFlow_m3h), 'WAS pumps');
  const effluent = trains.map((t) => effluentFlow_m3h(t.influentFlow_m3h, t.wasFlow_m3h));
  const qe = sumFigures(effluent, 'trains');
  const xe = fromFigures([qe, ...trains.flatMap((t, i) => [effluent[i]!, t.effluentTss_gL])], (qeTotal, ...rest) => {
    if (!(qeTotal > 0)) return 0;
    let acc = 0;
    for (let i = 0; i < rest.length; i += 2) acc += rest[i]! * rest[i + 1]!;
    return acc / qeTotal;
  });
  const xw = fromFigures([wasFlow_m3h, ...trains.flatMap((t) => [t.wasFlow_m3h, t.rasConc_gL])], (qwTotal, ...rest) => {
    let acc = 0;
    let n = 0;
    for (let i = 0; i < rest.length; i += 2) {
      acc += qwTotal > 0 ? rest[i]! * rest[i + 1]! : rest[i + 1]!;
      n += qwTotal > 0 ? rest[i]! : 1;
    }
    return acc / n;
  });
  return { wasAdvice_m3h: fromFigures([totalMass_kg, qe, xe, xw], (m, qeT, xeM, xwM) => wasFlowForTargetSrt_m3h(m, target_d, qeT, xeM, xwM)), wasFlow_m3h };
}
