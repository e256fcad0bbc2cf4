/**
 * The live solids balance of one plant: signals → the shared/domain methods → one Balance.
 * Pure (data in, data out; the wall clock is an input), so the server's balance engine is I/O
 * around the one call {@link computeBalance}. Each concern is its own module beside this one:
 * signals.ts (latest value → figure with staleness), inventory.ts, flows.ts, ras.ts, storm.ts,
 * srt.ts, series.ts; this file only composes them per train and for the plant.
 */
import { OPERATOR_CAUTION, type Balance, type BalanceData } from '../../contracts/balance.js';
import type { EffectiveSettings } from '../../contracts/settings.js';
import { estimated, fromFigures, meanFigures, sumFigures, unavailable, withUnit, worstQuality, type Figure, type Quality } from '../quality.js';
import { effluentFlowSeries, trainInfluentFlow } from './flows.js';
import type { BalanceEngineInputs, TrainLayout } from './inputs.js';
import { basinMass_kg, blanketMassSeries, blanketRate_m_h, clarifierArea_m2, clarifierBlanket, clarifierIntegral, inventoryTotals, trainMlss_gL } from './inventory.js';
import { rasConcMaxFromSvi_gL, trainRasMargins } from './ras.js';
import { joinSeries, meanSeries, sumSeries, weightedSumSeries } from './series.js';
import { readSignals, settleability, type Signals } from './signals.js';
import { plantSettlingFit } from '../settling-fit.js';
import { chooseSettling, clarifierStatePoint, trainRasConcMax, type SettlingUsed } from './state-point.js';
import { effluentTssMissing, plantAerobicSrt, plantDynamicSrt, plantMassSeries, plantRollingSrt, solidsLossSeries, wasAdvice, type TrainSrtSeries } from './srt.js';
import { stormPeakFlow, stormShare, trainStorm, trainStormFlow_m3h, trainStormTimeline } from './storm.js';

const H = 3_600_000;
const iso = (ms: number) => new Date(ms).toISOString();

/** The present figures of one train, gathered before the plant-wide storm flow is known. */
interface TrainFigures {
  layout: TrainLayout;
  volume_m3: number;
  area_m2: number;
  rasPumpCapacity_m3h: number;
  influentFlow_m3h: Figure<number>;
  rasFlow_m3h: Figure<number>;
  wasFlow_m3h: Figure<number>;
  mlss_gL: Figure<number>;
  /** Mean underflow TSS of the train's clarifiers [g/L]. */
  rasConc_gL: Figure<number>;
  /** Mean effluent TSS [g/L]; taken as 0 (estimated) when unavailable. */
  effluentTss_gL: Figure<number>;
  clarifierMass_kg: Figure<number>;
  basins: BalanceData['basins'];
  clarifiers: BalanceData['clarifiers'];
  basinMasses: Figure<number>[];
  clarifierMasses: Figure<number>[];
  srtSeries: TrainSrtSeries;
}

interface PlantContext {
  signals: Signals;
  settings: EffectiveSettings;
  plantInfluent: Figure<number>;
  totalVolume_m3: number;
  settling: SettlingUsed;
  rasConcMaxRule_gL: Figure<number>;
}

/** One train: basins, flows, clarifiers (blanket, rise rate, balance integral) and its SRT-window series. */
function trainFigures(t: TrainLayout, ctx: PlantContext): TrainFigures {
  const { signals: sig, settings: s } = ctx;
  const clock = sig.clock_ms;
  const method = s['clarifier.blanket_conc_method'];
  const volume_m3 = t.basins.reduce((a, b) => a + b.volume_m3, 0);
  const ras = t.pumps.filter((p) => p.kind === 'ras');
  const was = t.pumps.filter((p) => p.kind === 'was');

  const basins: BalanceData['basins'] = [];
  const basinMasses: Figure<number>[] = [];
  for (const b of t.basins) {
    const x = sig.figure('basin.mlss', 'basin', b.id, b.code);
    const m = basinMass_kg(x, b.volume_m3);
    basinMasses.push(m);
    basins.push({ code: b.code, train: t.code, volume_m3: b.volume_m3, aeratedFraction: b.aeratedFraction ?? 1, mlss_gL: withUnit(x, 'g/L'), mass_kg: withUnit(m, 'kg') });
  }
  const mlss_gL = trainMlss_gL(basinMasses, volume_m3, t.code);
  const basinFlows = t.basins.map((b) => sig.figure('basin.influentFlow', 'basin', b.id, b.code));
  const influentFlow_m3h = trainInfluentFlow(basinFlows, ctx.plantInfluent, volume_m3 / ctx.totalVolume_m3, t.code);
  const rasFlow_m3h = sumFigures(ras.map((p) => sig.figure('pump.flow', 'pump', p.id, p.code)), `RAS pumps in ${t.code}`);
  const wasFlow_m3h = sumFigures(was.map((p) => sig.figure('pump.flow', 'pump', p.id, p.code)), `WAS pumps in ${t.code}`);

  // Series of the train over a window, in base units.
  const basinSeries = (signal: 'basin.mlss' | 'basin.influentFlow', from: number) => t.basins.map((b) => sig.series(signal, 'basin', b.id, from));
  const pumpFlowSeries = (pumps: typeof ras, from: number) => sumSeries(pumps.map((p) => sig.series('pump.flow', 'pump', p.id, from)));
  const mlssSeries = (from: number) => joinSeries(basinSeries('basin.mlss', from), (v) => v.reduce((acc, vi, i) => acc + vi * t.basins[i]!.volume_m3, 0) / volume_m3);

  const clarifiers: BalanceData['clarifiers'] = [];
  const trainArea_m2 = t.clarifiers.reduce((a, c) => a + clarifierArea_m2(c), 0);
  const clarifierMasses: Figure<number>[] = [];
  const xrs: Figure<number>[] = [];
  const xes: Figure<number>[] = [];
  for (const c of t.clarifiers) {
    const level = sig.figure('clarifier.blanketLevel', 'clarifier', c.id, c.code);
    const xr = sig.figure('clarifier.underflowTss', 'clarifier', c.id, c.code);
    const xe = sig.figure('clarifier.effluentTss', 'clarifier', c.id, c.code);
    xrs.push(xr);
    xes.push(xe);
    const blanket = clarifierBlanket({ method, mlss: mlss_gL, rasConc: xr, level, clarifier: c });
    clarifierMasses.push(blanket.mass_kg);
    const rateWindow_min = s['alarm.blanket_rate_window_min'];
    const rate = blanketRate_m_h(sig.series('clarifier.blanketLevel', 'clarifier', c.id, clock - rateWindow_min * 60_000), rateWindow_min, c.code);
    // The balance integral needs the feed of this clarifier: known only when it is the train's only one.
    let integral: ReturnType<typeof clarifierIntegral>;
    if (t.clarifiers.length === 1) {
      const from = clock - s['clarifier.integral_window_h'] * H;
      integral = clarifierIntegral(
        {
          influentFlow_m3h: sumSeries(basinSeries('basin.influentFlow', from)),
          rasFlow_m3h: pumpFlowSeries(ras, from),
          wasFlow_m3h: pumpFlowSeries(was, from),
          mlss_gL: mlssSeries(from),
          rasConc_gL: sig.series('clarifier.underflowTss', 'clarifier', c.id, from),
          effluentTss_gL: sig.series('clarifier.effluentTss', 'clarifier', c.id, from),
          blanketLevel_m: sig.series('clarifier.blanketLevel', 'clarifier', c.id, from),
        },
        { method, clarifier: c, massNow_kg: blanket.mass_kg },
      );
    } else {
      const u = unavailable<number>(`${c.code}: train ${t.code} has ${t.clarifiers.length} clarifiers; the feed split between them is not measured`);
      integral = { integratedMass_kg: u, discrepancy_kg: u };
    }
    clarifiers.push({
      code: c.code,
      train: t.code,
      area_m2: clarifierArea_m2(c),
      sideWaterDepth_m: c.sideWaterDepth_m,
      blanketLevel_m: withUnit(level, 'm'),
      blanketRate_m_h: withUnit(rate, 'm/h'),
      underflowTss_gL: withUnit(xr, 'g/L'),
      effluentTss_gL: withUnit(xe, 'g/L'),
      blanketConc_gL: withUnit(blanket.conc_gL, 'g/L'),
      blanketMass_kg: withUnit(blanket.mass_kg, 'kg'),
      integratedMass_kg: withUnit(integral.integratedMass_kg, 'kg'),
      integralDiscrepancy_kg: withUnit(integral.discrepancy_kg, 'kg'),
      statePoint: clarifierStatePoint({
        share: clarifierArea_m2(c) / trainArea_m2,
        entries: t.clarifiers.length,
        code: c.code,
        area_m2: clarifierArea_m2(c),
        influentFlow_m3h,
        rasFlow_m3h,
        wasFlow_m3h,
        mlss_gL,
        settling: ctx.settling,
        rasConcMaxRule_gL: ctx.rasConcMaxRule_gL,
      }),
    });
  }
  // Effluent TSS unavailable: taken as 0 for the SRT and the WAS advice (which it then overstates), said so.
  let effluentTss_gL = meanFigures(xes, `clarifiers in ${t.code}`);
  if (effluentTss_gL.value === null) effluentTss_gL = estimated(0, ...effluentTss_gL.reasons, `${t.code}: effluent TSS unavailable, taken as 0 g/L (SRT overstated)`);

  // The train's series over the SRT window.
  const from = clock - s['srt.window_h'] * H;
  const mlssWindow = mlssSeries(from);
  const underflow = t.clarifiers.map((c) => sig.series('clarifier.underflowTss', 'clarifier', c.id, from));
  const effluentTss = meanSeries(t.clarifiers.map((c) => sig.series('clarifier.effluentTss', 'clarifier', c.id, from)));
  const wasWindow = pumpFlowSeries(was, from);
  const srtSeries: TrainSrtSeries = {
    aerationMass_kg: weightedSumSeries(basinSeries('basin.mlss', from), t.basins.map((b) => b.volume_m3)),
    aerobicMass_kg: weightedSumSeries(basinSeries('basin.mlss', from), t.basins.map((b) => b.volume_m3 * (b.aeratedFraction ?? 1))),
    clarifierMass_kg: sumSeries(
      t.clarifiers.map((c, i) => blanketMassSeries({ method, clarifier: c, level: sig.series('clarifier.blanketLevel', 'clarifier', c.id, from), rasConc: underflow[i]!, mlss: mlssWindow })),
    ),
    wasFlow_m3h: wasWindow,
    wasTss_gL: meanSeries(underflow),
    effluentFlow_m3h: effluentFlowSeries(sumSeries(basinSeries('basin.influentFlow', from)), wasWindow),
    effluentTss_gL: effluentTss.size ? effluentTss : null,
  };

  return {
    layout: t,
    volume_m3,
    area_m2: t.clarifiers.reduce((a, c) => a + clarifierArea_m2(c), 0),
    rasPumpCapacity_m3h: ras.reduce((a, p) => a + p.capacity_m3h, 0),
    influentFlow_m3h,
    rasFlow_m3h,
    wasFlow_m3h,
    mlss_gL,
    rasConc_gL: meanFigures(xrs, `clarifiers in ${t.code}`),
    effluentTss_gL,
    clarifierMass_kg: sumFigures(clarifierMasses, `clarifiers in ${t.code}`),
    basins,
    clarifiers,
    basinMasses,
    clarifierMasses,
    srtSeries,
  };
}

/**
 * Computes a plant's balance from its mapped signals, rollup series and latest SVI with the
 * shared/domain methods (design §3): inventory (basin MLSS × volume; blanket level × area ×
 * blanket concentration, and the clarifier balance integral beside it), RAS margins (items 1–3,
 * X_R,max = factor/SVI [CP]), storm projection at the peak flow (item 4), rolling and dynamic
 * SRT with the WAS advice (item 5). Inputs that are missing, stale or bad propagate as
 * estimated/unavailable figures with their reasons (item 9).
 */
export function computeBalance(inp: BalanceEngineInputs, s: EffectiveSettings): Balance {
  const { layout, now_ms } = inp;
  const signals = readSignals(inp, { staleFactor: s['inputs.stale_factor'], maxAge_s: s['inputs.max_age_s'] });
  const clock = signals.clock_ms;
  const svi = settleability(inp.svi, now_ms, s['svi.max_age_d']);
  const rasConcMaxRule = rasConcMaxFromSvi_gL(svi, s['ras.xr_factor']);
  const fit = plantSettlingFit(inp.settlingTests ?? [], s['settling.cylinder_height_m']);
  const { used: settling, out: settlingOut } = chooseSettling(
    svi,
    s['settling.correlation'],
    { fit, minPoints: s['settling.fit_min_points'] },
    inp.operatingFit ? { fit: inp.operatingFit, minPoints: s['settling.operating_fit_min_points'] } : null,
  );
  const totalVolume_m3 = layout.trains.reduce((a, t) => a + t.basins.reduce((b, x) => b + x.volume_m3, 0), 0);
  const plantInfluent = signals.figure('plant.influentFlow', 'plant', layout.plantId, layout.code);
  const trains = layout.trains.map((t) => trainFigures(t, { signals, settings: s, plantInfluent, totalVolume_m3, settling, rasConcMaxRule_gL: rasConcMaxRule }));

  const inventory = inventoryTotals(
    trains.flatMap((t) => t.basinMasses),
    trains.flatMap((t) => t.clarifierMasses),
  );

  // Storm flow: the plant's peak, else factor × the mean influent over the SRT window (plant meter, else the basins').
  const srtFrom = clock - s['srt.window_h'] * H;
  let influentHistory = signals.series('plant.influentFlow', 'plant', layout.plantId, srtFrom);
  if (influentHistory.size === 0) influentHistory = sumSeries(layout.trains.flatMap((t) => t.basins.map((b) => signals.series('basin.influentFlow', 'basin', b.id, srtFrom))));
  const storm = stormPeakFlow(layout.peakFlow_m3h, influentHistory, s['storm.peak_flow_factor'], s['srt.window_h']);
  const influents = trains.map((t) => t.influentFlow_m3h);
  const stormChecks = { minMlss_gL: s['storm.min_mlss_gL'], maxStoredFraction: s['storm.max_stored_fraction'], maxBlanketRise_m: s['storm.max_blanket_rise_m'] };

  const trainsOut: BalanceData['trains'] = trains.map((t) => {
    const xrMax = trainRasConcMax(rasConcMaxRule, t.clarifiers.map((c) => c.statePoint));
    // What the equilibrium projection and the storm in time share: the train's state now and its
    // share of the plant's storm flow, computed once for both.
    const stormIn = {
      trainCode: t.layout.code,
      influentFlow_m3h: t.influentFlow_m3h,
      rasFlow_m3h: t.rasFlow_m3h,
      mlss_gL: t.mlss_gL,
      svi_mLg: svi,
      stormFlow_m3h: trainStormFlow_m3h(storm.peak, stormShare(t.influentFlow_m3h, influents, t.volume_m3, totalVolume_m3)),
      clarifierMass_kg: t.clarifierMass_kg,
      aerationVolume_m3: t.volume_m3,
      clarifierArea_m2: t.area_m2,
      checks: stormChecks,
      blanketNow_m: maxBlanket(t.clarifiers),
      clarifierDepth_m: Math.min(...t.layout.clarifiers.map((c) => c.sideWaterDepth_m)),
    };
    return {
    code: t.layout.code,
    influentFlow_m3h: withUnit(t.influentFlow_m3h, 'm3/h'),
    rasFlow_m3h: withUnit(t.rasFlow_m3h, 'm3/h'),
    wasFlow_m3h: withUnit(t.wasFlow_m3h, 'm3/h'),
    mlss_gL: withUnit(t.mlss_gL, 'g/L'),
    rasPumpCapacity_m3h: t.rasPumpCapacity_m3h,
    ras: {
      ...trainRasMargins({ influentFlow_m3h: t.influentFlow_m3h, rasFlow_m3h: t.rasFlow_m3h, mlss_gL: t.mlss_gL, rasConcMax_gL: xrMax.value, rasPumpCapacity_m3h: t.rasPumpCapacity_m3h }),
      rasConcMaxRule_gL: withUnit(rasConcMaxRule, 'g/L'),
      rasConcMaxFlux_gL: withUnit(minFlux(t.clarifiers), 'g/L'),
    },
    rasConcMaxBasis: xrMax.used,
    storm: {
      ...trainStorm({ ...stormIn, xrFactor: s['ras.xr_factor'] }),
      timeline: trainStormTimeline({ ...stormIn, hydrograph: s['storm.hydrograph'], rasConcMax_gL: xrMax.value }),
    },
  };
  });

  // SRT: rolling over the window and dynamic, from the trains' series; WAS advice from the present totals.
  const srtSeries = trains.map((t) => t.srtSeries);
  const rolling = plantRollingSrt(srtSeries, clock, s['srt.window_h']);
  const dynamic = plantDynamicSrt(plantMassSeries(srtSeries).total_kg, solidsLossSeries(srtSeries), s['srt.window_h'], effluentTssMissing(srtSeries));
  const aerobic = plantAerobicSrt(rolling.aerobic_d, layout, trains.flatMap((t) => t.basins));
  const target_d = s['srt.target_d'];
  const advice = wasAdvice(
    trains.map((t) => ({ influentFlow_m3h: t.influentFlow_m3h, wasFlow_m3h: t.wasFlow_m3h, rasConc_gL: t.rasConc_gL, effluentTss_gL: t.effluentTss_gL })),
    inventory.totalMass_kg,
    target_d,
  );

  const data: BalanceData = {
    inventory: {
      aerationMass_kg: withUnit(inventory.aerationMass_kg, 'kg'),
      clarifierMass_kg: withUnit(inventory.clarifierMass_kg, 'kg'),
      totalMass_kg: withUnit(inventory.totalMass_kg, 'kg'),
      storedFraction: withUnit(inventory.storedFraction, '-'),
    },
    basins: trains.flatMap((t) => t.basins),
    clarifiers: trains.flatMap((t) => t.clarifiers),
    trains: trainsOut,
    settleability: { svi_mLg: withUnit(svi, 'mL/g'), kind: inp.svi?.kind ?? null, sampledAt: inp.svi ? iso(inp.svi.sampledAt_ms) : null },
    settling: settlingOut,
    storm: { peakFlow_m3h: withUnit(storm.peak, 'm3/h'), source: storm.source },
    srt: {
      total_d: withUnit(rolling.total_d, 'd'),
      aeration_d: withUnit(rolling.aeration_d, 'd'),
      aerobic_d: withUnit(aerobic.srt_d, 'd'),
      aerobicFraction: withUnit(aerobic.fraction, '-'),
      coverage: Math.round(rolling.coverage * 1000) / 1000,
      dynamic_d: withUnit(dynamic, 'd'),
      target_d,
      wasAdvice_m3h: withUnit(advice.wasAdvice_m3h, 'm3/h'),
      wasFlow_m3h: withUnit(advice.wasFlow_m3h, 'm3/h'),
    },
    caution: OPERATOR_CAUTION,
  };
  return {
    plantId: layout.plantId,
    ts: iso(now_ms),
    quality: headlineQuality(data),
    data,
    inputs: {
      signals: signals.inputs,
      plantClock: signals.plantClock_ms === null ? null : iso(signals.plantClock_ms),
      lastReceivedAt: inp.lastReceived_ms === null ? null : iso(inp.lastReceived_ms),
      ingestAge_s: inp.lastReceived_ms === null ? null : Math.round(Math.max(0, now_ms - inp.lastReceived_ms) / 100) / 10,
      svi: inp.svi ? { kind: inp.svi.kind, value_mLg: inp.svi.value_mLg, sampledAt: iso(inp.svi.sampledAt_ms) } : null,
    },
  };
}

/** The highest present blanket level of a train's clarifiers [m] (unavailable when any is). */
function maxBlanket(clarifiers: BalanceData['clarifiers']): Figure<number> {
  return fromFigures(clarifiers.map((c) => ({ value: c.blanketLevel_m.value, quality: c.blanketLevel_m.quality, reasons: [...c.blanketLevel_m.reasons] })), (...v) => Math.max(...v));
}

/** The lowest flux-theory X_R,max over a train's clarifiers (unavailable when none has one). */
function minFlux(clarifiers: BalanceData['clarifiers']): Figure<number> {
  const f = clarifiers.map((c) => c.statePoint.rasConcMax.flux_gL).filter((x) => x.value !== null);
  if (f.length === 0) return unavailable(...(clarifiers[0]?.statePoint.rasConcMax.flux_gL.reasons ?? ['no clarifier']));
  const m = f.reduce((a, b) => (b.value! < a.value! ? b : a));
  return { value: m.value, quality: m.quality, reasons: [...m.reasons] };
}

/** Quality of a balance: the worst of its headline figures (total inventory, SRT, each train's concentration margin and storm MLSS). */
export function headlineQuality(d: BalanceData): Quality {
  return worstQuality(d.inventory.totalMass_kg.quality, d.srt.total_d.quality, ...d.trains.map((t) => t.ras.concentrationMargin.quality), ...d.trains.map((t) => t.storm.equilibriumMlss_gL.quality));
}
