/**
 * The live solids balance of one plant: signals → shared/domain → one Balance object.
 *
 * `computeBalance` is pure (data in, data out, no clock, no database) so it is unit-tested with
 * plain numbers; `balanceService(ctx).runOnce` does the I/O around it (balance-inputs.service.ts
 * reads, balance.repository.ts writes, the stream notification publishes).
 *
 * Time. Samples carry the source's timestamp `ts`; the simulator runs faster than real time, so
 * its timestamps run ahead of the wall clock. Two clocks are therefore kept apart:
 * - the *plant clock* is the newest sample `ts` of the plant; rolling windows (SRT, the
 *   clarifier integral, the blanket rate) end there, so they hold the same amount of process
 *   time whatever the simulation speed;
 * - *staleness* is judged by the wall-clock age of `tag_latest.received_at` (did ingest hear
 *   from the tag lately?) against `inputs.stale_factor` × the tag's expected period. Sample time
 *   cannot be used for it: against the wall clock a sped-up simulator is always "in the future",
 *   and against the plant clock a tag polled once a wall second (OPC UA sampling) lags 60 process
 *   seconds at 60× although nothing is wrong. The lag behind the plant clock is still reported
 *   per input (`lag_s`) for the operator to see; a source sending old timestamps is graded by
 *   ingest (clock-skew flag). Expected periods are in process time, so a sped-up simulator makes
 *   the wall-clock test more lenient, never stricter.
 * A stale value is used (estimated, with the reason) until `inputs.max_age_s`, then unavailable.
 */
import { OPERATOR_CAUTION, type Balance, type BalanceData, type BalanceInputs, type FigureOut } from '../../shared/contracts/balance.ts';
import type { SignalKindName } from '../../shared/contracts/plant-layout.ts';
import { qualityFlags, qualityGrade } from '../../shared/contracts/sample-quality.ts';
import type { EffectiveSettings } from '../../shared/contracts/settings.ts';
import { blanketConcentration_gL, blanketMass_kg, crossCheckClarifierInventory, type ClarifierBalancePoint } from '../../shared/domain/clarifier-inventory.ts';
import { rasConcMaxRuleOfThumb_gL } from '../../shared/domain/flux.ts';
import { combineQuality, estimated, good, propagate, unavailable, worstQuality, type Figure, type Quality } from '../../shared/domain/quality.ts';
import { rasMargin } from '../../shared/domain/ras-margin.ts';
import { dynamicSrt, rollingSrt, wasFlowForTargetSrt_m3h, type TimeSeries } from '../../shared/domain/srt.ts';
import { stormProjection } from '../../shared/domain/storm.ts';

// ---------------------------------------------------------------- inputs of the pure function

export type TargetType = 'plant' | 'train' | 'basin' | 'clarifier' | 'pump';

/** One mapped signal with its latest value (tag_latest joined with tags and signal_map). */
export interface SignalReading {
  tagId: number;
  tag: string;
  signal: SignalKindName;
  targetType: TargetType;
  targetId: number;
  /** The tag's engineering unit (tags.unit). */
  unit: string;
  value: number | null;
  /** Sample quality code (shared/contracts/sample-quality.ts). */
  qualityCode: number;
  /** Null when nothing was ever received for the tag. */
  ts_ms: number | null;
  receivedAt_ms: number | null;
  expectedPeriod_s: number;
}

/** One rollup_1m bucket of a tag: the mean, the worst quality code of the bucket. */
export interface SeriesPoint {
  t_ms: number;
  mean: number;
  qualityCode: number;
}

export interface LayoutIn {
  plantId: number;
  code: string;
  peakFlow_m3h: number | null;
  trains: {
    id: number;
    code: string;
    basins: { id: number; code: string; volume_m3: number }[];
    clarifiers: { id: number; code: string; area_m2: number; sideWaterDepth_m: number; count: number }[];
    pumps: { id: number; code: string; kind: 'ras' | 'was'; capacity_m3h: number }[];
  }[];
}

export interface BalanceEngineInputs {
  /** Wall clock of the computation (epoch ms). */
  now_ms: number;
  layout: LayoutIn;
  readings: SignalReading[];
  /** rollup_1m buckets per tag id, covering at least the SRT window before the plant clock. */
  series: Map<number, SeriesPoint[]>;
  /** Latest SVI or DSVI from lab_results, or null. */
  svi: { kind: 'SVI' | 'DSVI'; value_mLg: number; sampledAt_ms: number; flags: string[] } | null;
  /** Newest received_at over all tags of the plant (wall clock), or null when none ever arrived. */
  lastReceived_ms: number | null;
}

// ---------------------------------------------------------------- units at the edge

/** Tag units the engine understands, as factor to the engine's SI unit of that dimension. */
const UNIT_TABLE: Record<string, { dim: 'flow' | 'conc' | 'length' | 'state'; factor: number }> = {
  'm3/h': { dim: 'flow', factor: 1 },
  'm³/h': { dim: 'flow', factor: 1 },
  'm3/d': { dim: 'flow', factor: 1 / 24 },
  'm³/d': { dim: 'flow', factor: 1 / 24 },
  'L/s': { dim: 'flow', factor: 3.6 },
  'g/L': { dim: 'conc', factor: 1 },
  'kg/m3': { dim: 'conc', factor: 1 },
  'kg/m³': { dim: 'conc', factor: 1 },
  'mg/L': { dim: 'conc', factor: 1e-3 },
  'g/m3': { dim: 'conc', factor: 1e-3 },
  'g/m³': { dim: 'conc', factor: 1e-3 },
  m: { dim: 'length', factor: 1 },
  cm: { dim: 'length', factor: 0.01 },
  state: { dim: 'state', factor: 1 },
};
const SIGNAL_DIM: Record<SignalKindName, 'flow' | 'conc' | 'length' | 'state'> = {
  'plant.influentFlow': 'flow',
  'plant.effluentFlow': 'flow',
  'basin.influentFlow': 'flow',
  'basin.mlss': 'conc',
  'clarifier.blanketLevel': 'length',
  'clarifier.underflowTss': 'conc',
  'clarifier.effluentTss': 'conc',
  'pump.flow': 'flow',
  'pump.running': 'state',
};
const SI_UNIT = { flow: 'm3/h', conc: 'g/L', length: 'm', state: 'state' } as const;

/** Factor from the tag's unit to SI for this signal, or null when the unit does not fit. */
export function unitFactor(signal: SignalKindName, unit: string): number | null {
  const u = UNIT_TABLE[unit.trim()];
  return u && u.dim === SIGNAL_DIM[signal] ? u.factor : null;
}

// ---------------------------------------------------------------- helpers

const fo = (f: Figure<number>, unit: string): FigureOut => ({ value: f.value, quality: f.quality, reasons: [...f.reasons], unit });
const iso = (ms: number) => new Date(ms).toISOString();

/** Sum of figures; unavailable if any part is (a partial sum would be a silent under-count). */
function sumFigures(parts: Figure<number>[], what: string): Figure<number> {
  if (parts.length === 0) return unavailable(`no ${what} configured`);
  const c = combineQuality(...parts);
  if (parts.some((p) => p.value === null)) return unavailable(...c.reasons);
  const total = parts.reduce((s, p) => s + (p.value as number), 0);
  return propagate(good(total), ...parts);
}

/** fn over figure values with quality propagation; unavailable if any input is. */
function over(inputs: Figure<number>[], fn: (...v: number[]) => number | Figure<number>): Figure<number> {
  if (inputs.some((i) => i.value === null)) return unavailable(...combineQuality(...inputs).reasons);
  const r = fn(...inputs.map((i) => i.value as number));
  return propagate(typeof r === 'number' ? good(r) : r, ...inputs);
}

/** Least-squares slope of (t_h, y) [y/h]; null with fewer than 3 points. */
function slopePerHour(pts: { t_ms: number; v: number }[]): number | null {
  if (pts.length < 3) return null;
  const t0 = pts[0]!.t_ms;
  const xs = pts.map((p) => (p.t_ms - t0) / 3_600_000);
  const mx = xs.reduce((a, b) => a + b, 0) / xs.length;
  const my = pts.reduce((a, p) => a + p.v, 0) / pts.length;
  let num = 0;
  let den = 0;
  for (let i = 0; i < pts.length; i++) {
    num += (xs[i]! - mx) * (pts[i]!.v - my);
    den += (xs[i]! - mx) ** 2;
  }
  return den > 0 ? num / den : null;
}

// ---------------------------------------------------------------- the pure assembly

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
  const seen = inp.readings.flatMap((r) => (r.ts_ms === null ? [] : [r.ts_ms]));
  const plantClock_ms = seen.length ? Math.max(...seen) : null;
  const clock = plantClock_ms ?? now_ms;
  const staleFactor = s['inputs.stale_factor'];
  const maxAge_s = s['inputs.max_age_s'];
  const targetName = new Map<string, string>();
  targetName.set(`plant:${layout.plantId}`, layout.code);
  for (const t of layout.trains) {
    targetName.set(`train:${t.id}`, t.code);
    for (const b of t.basins) targetName.set(`basin:${b.id}`, b.code);
    for (const c of t.clarifiers) targetName.set(`clarifier:${c.id}`, c.code);
    for (const p of t.pumps) targetName.set(`pump:${p.id}`, p.code);
  }

  // Latest value of every mapped signal, as a figure in SI with its quality and age.
  const inputs: BalanceInputs['signals'] = [];
  const latest = new Map<string, { fig: Figure<number>; reading: SignalReading; factor: number | null }>();
  for (const r of inp.readings) {
    const factor = unitFactor(r.signal, r.unit);
    const never = r.ts_ms === null || r.receivedAt_ms === null;
    const age_s = never ? Infinity : Math.max(0, (now_ms - r.receivedAt_ms!) / 1000);
    const lag_s = never ? Infinity : Math.max(0, (clock - r.ts_ms!) / 1000);
    const staleAfter_s = staleFactor * r.expectedPeriod_s;
    const stale = age_s > staleAfter_s;
    const grade = qualityGrade(r.qualityCode);
    const flags = qualityFlags(r.qualityCode);
    const why = (m: string) => `${r.tag}: ${m}`;
    let fig: Figure<number>;
    if (never) fig = unavailable(why('no value received yet'));
    else if (factor === null) fig = unavailable(why(`unit '${r.unit}' does not fit signal ${r.signal} (expected ${SI_UNIT[SIGNAL_DIM[r.signal]]} or a known equivalent)`));
    else if (r.value === null || !Number.isFinite(r.value)) fig = unavailable(why('no value'));
    else if (grade === 'bad') fig = unavailable(why(`bad quality${flags.length ? ` (${flags.join(', ')})` : ''}`));
    else if (age_s > maxAge_s) fig = unavailable(why(`stale: last value received ${Math.round(age_s)} s ago, beyond the ${maxAge_s} s it may be used`));
    else {
      const reasons: string[] = [];
      if (grade === 'uncertain') reasons.push(why(`uncertain quality${flags.length ? ` (${flags.join(', ')})` : ''}`));
      if (stale) reasons.push(why(`stale: last value received ${Math.round(age_s)} s ago (> ${staleFactor} × ${r.expectedPeriod_s} s expected period); last value used`));
      fig = reasons.length ? estimated(r.value * factor, ...reasons) : good(r.value * factor);
    }
    latest.set(`${r.signal}|${r.targetType}:${r.targetId}`, { fig, reading: r, factor });
    inputs.push({
      tagId: r.tagId,
      tag: r.tag,
      signal: r.signal,
      target: targetName.get(`${r.targetType}:${r.targetId}`) ?? `${r.targetType}:${r.targetId}`,
      value: fig.value,
      unit: SI_UNIT[SIGNAL_DIM[r.signal]],
      quality: fig.quality,
      reasons: fig.reasons,
      ts: never ? null : iso(r.ts_ms!),
      receivedAt: never ? null : iso(r.receivedAt_ms!),
      age_s: never ? null : Math.round(age_s * 10) / 10,
      lag_s: never ? null : Math.round(lag_s * 10) / 10,
      expectedPeriod_s: r.expectedPeriod_s,
      stale,
      bad: !never && (factor === null || grade === 'bad'),
    });
  }
  const sig = (signal: SignalKindName, type: TargetType, id: number, label: string): Figure<number> =>
    latest.get(`${signal}|${type}:${id}`)?.fig ?? unavailable(`no tag mapped for ${signal} of ${label}`);

  /** rollup_1m means of a signal in SI, bad buckets left out, within [from, to]. */
  const seriesOf = (signal: SignalKindName, type: TargetType, id: number, from_ms: number, to_ms = clock): Map<number, number> => {
    const l = latest.get(`${signal}|${type}:${id}`);
    const out = new Map<number, number>();
    if (!l || l.factor === null) return out;
    for (const p of inp.series.get(l.reading.tagId) ?? []) {
      if (p.t_ms < from_ms || p.t_ms > to_ms || qualityGrade(p.qualityCode) === 'bad' || !Number.isFinite(p.mean)) continue;
      out.set(p.t_ms, p.mean * l.factor);
    }
    return out;
  };
  /** Buckets present in every map, combined by fn. */
  const joinSeries = (maps: Map<number, number>[], fn: (v: number[]) => number): Map<number, number> => {
    const out = new Map<number, number>();
    if (maps.length === 0) return out;
    for (const t of maps[0]!.keys()) {
      const vs = maps.map((m) => m.get(t));
      if (vs.every((v) => v !== undefined)) out.set(t, fn(vs as number[]));
    }
    return out;
  };
  const sumSeries = (maps: Map<number, number>[]) => joinSeries(maps, (v) => v.reduce((a, b) => a + b, 0));

  // Settleability: the latest SVI/DSVI of the lab.
  let svi: Figure<number>;
  if (!inp.svi) svi = unavailable('no SVI or DSVI in the lab results: RAS concentration limit and storm projection need one');
  else {
    const ageD = (now_ms - inp.svi.sampledAt_ms) / 86_400_000;
    const why: string[] = [];
    if (ageD > s['svi.max_age_d']) why.push(`latest ${inp.svi.kind} is ${ageD.toFixed(1)} d old (> ${s['svi.max_age_d']} d)`);
    if (inp.svi.flags.length) why.push(`latest ${inp.svi.kind} is flagged: ${inp.svi.flags.join(', ')}`);
    svi = !(inp.svi.value_mLg > 0) ? unavailable(`latest ${inp.svi.kind} is not positive`) : why.length ? estimated(inp.svi.value_mLg, ...why) : good(inp.svi.value_mLg);
  }
  const xrMax = svi.value === null ? svi : propagate(rasConcMaxRuleOfThumb_gL(svi.value, s['ras.xr_factor']), svi);

  // Plant influent: latest and 24 h mean (for the storm default).
  const srtWindow_ms = s['srt.window_h'] * 3_600_000;
  const windowStart = clock - srtWindow_ms;

  const basinsOut: BalanceData['basins'] = [];
  const clarifiersOut: BalanceData['clarifiers'] = [];
  const trainsOut: BalanceData['trains'] = [];
  const basinMasses: Figure<number>[] = [];
  const clarifierMasses: Figure<number>[] = [];
  const trainFlows: Figure<number>[] = [];
  const totalVolume = layout.trains.reduce((a, t) => a + t.basins.reduce((b, x) => b + x.volume_m3, 0), 0);
  const plantInfluent = sig('plant.influentFlow', 'plant', layout.plantId, layout.code);
  // Per-train series for the SRT window and the clarifier integral.
  const srtParts: { aer: Map<number, number>; clar: Map<number, number>; qw: Map<number, number>; xw: Map<number, number>; qe: Map<number, number>; xe: Map<number, number> | null }[] = [];
  const trainState: { t: LayoutIn['trains'][number]; q: Figure<number>; qr: Figure<number>; qw: Figure<number>; x: Figure<number>; xr: Figure<number>; xe: Figure<number>; clarMass: Figure<number>; area: number; volume: number; cap: number }[] = [];

  for (const t of layout.trains) {
    const volume = t.basins.reduce((a, b) => a + b.volume_m3, 0);
    // Basins: MLSS × volume.
    const mlssFigs: Figure<number>[] = [];
    const massFigs: Figure<number>[] = [];
    for (const b of t.basins) {
      const x = sig('basin.mlss', 'basin', b.id, b.code);
      const m = over([x], (v) => v * b.volume_m3);
      mlssFigs.push(x);
      massFigs.push(m);
      basinMasses.push(m);
      basinsOut.push({ code: b.code, train: t.code, volume_m3: b.volume_m3, mlss_gL: fo(x, 'g/L'), mass_kg: fo(m, 'kg') });
    }
    const trainMass = sumFigures(massFigs, `basins in ${t.code}`);
    const x = over([trainMass], (m) => m / volume);
    // Train influent: the basins' own meters, else the plant meter split by basin volume.
    const basinQ = t.basins.map((b) => sig('basin.influentFlow', 'basin', b.id, b.code));
    let q = sumFigures(basinQ, `basin influent meters in ${t.code}`);
    if (q.value === null && plantInfluent.value !== null) {
      q = propagate(estimated(plantInfluent.value * (volume / totalVolume), `${t.code}: basin influent not measured; plant influent split by basin volume`), plantInfluent);
    }
    trainFlows.push(q);
    const ras = t.pumps.filter((p) => p.kind === 'ras');
    const was = t.pumps.filter((p) => p.kind === 'was');
    const qr = sumFigures(ras.map((p) => sig('pump.flow', 'pump', p.id, p.code)), `RAS pumps in ${t.code}`);
    const qw = sumFigures(was.map((p) => sig('pump.flow', 'pump', p.id, p.code)), `WAS pumps in ${t.code}`);
    const cap = ras.reduce((a, p) => a + p.capacity_m3h, 0);
    // Clarifiers: blanket mass, and the balance integral when the train has one clarifier
    // (with several, the feed split between them is not measured).
    const xrFigs: Figure<number>[] = [];
    const xeFigs: Figure<number>[] = [];
    const cmFigs: Figure<number>[] = [];
    let area = 0;
    for (const c of t.clarifiers) {
      const a = c.area_m2 * c.count;
      area += a;
      const level = sig('clarifier.blanketLevel', 'clarifier', c.id, c.code);
      const xr = sig('clarifier.underflowTss', 'clarifier', c.id, c.code);
      const xe = sig('clarifier.effluentTss', 'clarifier', c.id, c.code);
      xrFigs.push(xr);
      xeFigs.push(xe);
      const method = s['clarifier.blanket_conc_method'];
      const conc = blanketConcentration_gL({ method, mlss_gL: x, rasConc_gL: xr });
      const mass = blanketMass_kg({ method, mlss_gL: x, rasConc_gL: xr, blanketLevel_m: level, clarifierArea_m2: a, sideWaterDepth_m: c.sideWaterDepth_m });
      cmFigs.push(mass);
      clarifierMasses.push(mass);
      // Blanket rise rate over the rate window.
      const rateWin_ms = s['alarm.blanket_rate_window_min'] * 60_000;
      const lv = [...seriesOf('clarifier.blanketLevel', 'clarifier', c.id, clock - rateWin_ms)].map(([t_ms, v]) => ({ t_ms, v })).sort((p, r) => p.t_ms - r.t_ms);
      const slope = slopePerHour(lv);
      let rate: Figure<number>;
      if (slope === null) rate = unavailable(`${c.code}: fewer than 3 blanket-level minutes in the last ${s['alarm.blanket_rate_window_min']} min`);
      else {
        const span = (lv[lv.length - 1]!.t_ms - lv[0]!.t_ms) / rateWin_ms;
        rate = span < 0.5 ? estimated(slope, `${c.code}: blanket-level data cover only ${(span * 100).toFixed(0)} % of the rate window`) : good(slope);
      }
      // Clarifier balance integral over the integral window, from the blanket mass at its start.
      let integrated: Figure<number> = unavailable(`${c.code}: train ${t.code} has ${t.clarifiers.length} clarifiers; the feed split between them is not measured`);
      let discrepancy: Figure<number> = integrated;
      if (t.clarifiers.length === 1) {
        const from = clock - s['clarifier.integral_window_h'] * 3_600_000;
        const qS = sumSeries(t.basins.map((b) => seriesOf('basin.influentFlow', 'basin', b.id, from)));
        const qrS = sumSeries(ras.map((p) => seriesOf('pump.flow', 'pump', p.id, from)));
        const qwS = sumSeries(was.map((p) => seriesOf('pump.flow', 'pump', p.id, from)));
        const xS = joinSeries(
          t.basins.map((b) => seriesOf('basin.mlss', 'basin', b.id, from)),
          (v) => v.reduce((acc, vi, i) => acc + vi * t.basins[i]!.volume_m3, 0) / volume,
        );
        const xrS = seriesOf('clarifier.underflowTss', 'clarifier', c.id, from);
        const xeS = seriesOf('clarifier.effluentTss', 'clarifier', c.id, from);
        const lvS = seriesOf('clarifier.blanketLevel', 'clarifier', c.id, from);
        const pts: ClarifierBalancePoint[] = [];
        for (const [tm, qv] of qS) {
          const qrv = qrS.get(tm);
          const qwv = qwS.get(tm);
          const xv = xS.get(tm);
          const xrv = xrS.get(tm);
          if (qrv === undefined || qwv === undefined || xv === undefined || xrv === undefined) continue;
          const xev = xeS.get(tm);
          pts.push({
            t_ms: tm,
            influentFlow_m3h: qv,
            rasFlow_m3h: qrv,
            wasFlow_m3h: qwv,
            mlss_gL: xv,
            rasConc_gL: xrv,
            effluentTss_gL: xev ?? 0,
            ...(xev === undefined ? { quality: 'estimated' as const, reasons: [`${c.code}: effluent TSS missing in some minutes, taken as 0`] } : {}),
          });
        }
        pts.sort((p, r) => p.t_ms - r.t_ms);
        const first = pts[0];
        const lv0 = first ? lvS.get(first.t_ms) : undefined;
        const m0: Figure<number> =
          first && lv0 !== undefined
            ? blanketMass_kg({ method, mlss_gL: first.mlss_gL, rasConc_gL: first.rasConc_gL, blanketLevel_m: lv0, clarifierArea_m2: a, sideWaterDepth_m: c.sideWaterDepth_m })
            : unavailable(`${c.code}: no blanket level at the start of the integral window`);
        const cc = crossCheckClarifierInventory(pts, m0, mass);
        integrated = cc.integratedMass_kg;
        discrepancy = cc.discrepancy_kg;
      }
      clarifiersOut.push({
        code: c.code,
        train: t.code,
        area_m2: a,
        sideWaterDepth_m: c.sideWaterDepth_m,
        blanketLevel_m: fo(level, 'm'),
        blanketRate_m_h: fo(rate, 'm/h'),
        underflowTss_gL: fo(xr, 'g/L'),
        effluentTss_gL: fo(xe, 'g/L'),
        blanketConc_gL: fo(conc, 'g/L'),
        blanketMass_kg: fo(mass, 'kg'),
        integratedMass_kg: fo(integrated, 'kg'),
        integralDiscrepancy_kg: fo(discrepancy, 'kg'),
      });
    }
    const clarMass = sumFigures(cmFigs, `clarifiers in ${t.code}`);
    const xr = over(xrFigs.length ? xrFigs : [unavailable<number>(`no clarifier in ${t.code}`)], (...v) => v.reduce((a, b) => a + b, 0) / v.length);
    // Effluent TSS missing: taken as 0 for the SRT (which it then overstates), said so.
    let xe = xeFigs.length ? over(xeFigs, (...v) => v.reduce((a, b) => a + b, 0) / v.length) : unavailable<number>('no clarifier');
    if (xe.value === null) xe = estimated(0, ...xe.reasons, `${t.code}: effluent TSS unavailable, taken as 0 g/L (SRT overstated)`);
    trainState.push({ t, q, qr, qw, x, xr, xe, clarMass, area, volume, cap });

    // SRT window series of this train.
    const aerS = joinSeries(
      t.basins.map((b) => seriesOf('basin.mlss', 'basin', b.id, windowStart)),
      (v) => v.reduce((acc, vi, i) => acc + vi * t.basins[i]!.volume_m3, 0),
    );
    const method = s['clarifier.blanket_conc_method'];
    const clarS = sumSeries(
      t.clarifiers.map((c) => {
        const lvS = seriesOf('clarifier.blanketLevel', 'clarifier', c.id, windowStart);
        const xrS = seriesOf('clarifier.underflowTss', 'clarifier', c.id, windowStart);
        return joinSeries([lvS, xrS, aerS], ([lv, xrv, aer]) => lv! * c.area_m2 * c.count * (method === 'mean' ? (aer! / volume + xrv!) / 2 : xrv!));
      }),
    );
    const qwS = sumSeries(was.map((p) => seriesOf('pump.flow', 'pump', p.id, windowStart)));
    const xwS = joinSeries(t.clarifiers.map((c) => seriesOf('clarifier.underflowTss', 'clarifier', c.id, windowStart)), (v) => v.reduce((a, b) => a + b, 0) / v.length);
    const qS = sumSeries(t.basins.map((b) => seriesOf('basin.influentFlow', 'basin', b.id, windowStart)));
    const qeS = joinSeries([qS, qwS], ([qv, qwv]) => Math.max(0, qv! - qwv!));
    const xeS = joinSeries(t.clarifiers.map((c) => seriesOf('clarifier.effluentTss', 'clarifier', c.id, windowStart)), (v) => v.reduce((a, b) => a + b, 0) / v.length);
    srtParts.push({ aer: aerS, clar: clarS, qw: qwS, xw: xwS, qe: qeS, xe: xeS.size ? xeS : null });
  }

  // Inventory.
  const aerationMass = sumFigures(basinMasses, 'basins');
  const clarifierMass = sumFigures(clarifierMasses, 'clarifiers');
  const totalMass = over([aerationMass, clarifierMass], (a, c) => a + c);
  const storedFraction = over([clarifierMass, totalMass], (c, m) => (m > 0 ? c / m : unavailable('inventory is zero')));

  // Storm flow: the plant's peak, else factor × 24 h mean influent (said so).
  let peak: Figure<number>;
  let peakSource: 'plant' | 'setting' | 'none' = 'none';
  if (layout.peakFlow_m3h !== null && layout.peakFlow_m3h > 0) {
    peak = good(layout.peakFlow_m3h);
    peakSource = 'plant';
  } else {
    let inflS = seriesOf('plant.influentFlow', 'plant', layout.plantId, windowStart);
    if (inflS.size === 0) inflS = sumSeries(layout.trains.flatMap((t) => t.basins.map((b) => seriesOf('basin.influentFlow', 'basin', b.id, windowStart))));
    if (inflS.size === 0) peak = unavailable('plant has no peak wet-weather flow and there is no influent history to take the setting default from');
    else {
      const mean = [...inflS.values()].reduce((a, b) => a + b, 0) / inflS.size;
      const hours = (inflS.size * 60_000) / 3_600_000;
      const f = s['storm.peak_flow_factor'];
      const reasons = [`plant has no peak wet-weather flow set: storm flow taken as ${f} × the ${hours < s['srt.window_h'] ? `${hours.toFixed(1)} h` : `${s['srt.window_h']} h`} mean influent ${mean.toFixed(0)} m3/h (setting storm.peak_flow_factor)`];
      peak = estimated(f * mean, ...reasons);
      peakSource = 'setting';
    }
  }
  const sumQ = trainFlows.every((f) => f.value !== null) ? trainFlows.reduce((a, f) => a + (f.value as number), 0) : null;

  for (const st of trainState) {
    const { t, q, qr, qw, x, clarMass, area, volume, cap } = st;
    // RAS margin (design §3 items 1–3): quality of Q, Q_R, X and SVI carried into every figure.
    const ins = [q, qr, x];
    let m: ReturnType<typeof rasMargin> | null = null;
    if (ins.every((f) => f.value !== null) && xrMax.value !== null) {
      m = rasMargin({ influentFlow_m3h: q.value!, rasFlow_m3h: qr.value!, mlss_gL: x.value!, rasConcMax_gL: xrMax.value, rasPumpCapacity_m3h: cap, rasConcMaxQuality: xrMax });
    }
    const cq = combineQuality(...ins, xrMax);
    const mf = (f: Figure<number> | undefined, unit: string): FigureOut => fo(f ? propagate(f, ...ins) : unavailable(...cq.reasons), unit);
    // Storm projection at this train's share of the peak flow.
    const share = sumQ && sumQ > 0 && q.value !== null ? q.value / sumQ : volume / totalVolume;
    const stormFlow = over([peak], (p) => p * share);
    const cm0 = clarMass.value !== null ? clarMass : estimated(0, ...clarMass.reasons, `${t.code}: clarifier mass unknown, taken as 0 (stored fraction understated)`);
    const stormIns = [q, qr, x, svi, stormFlow, cm0];
    let storm: Figure<ReturnType<typeof stormProjection> extends Figure<infer P> ? P : never> = unavailable(...combineQuality(...stormIns).reasons);
    if (stormIns.every((f) => f.value !== null)) {
      storm = propagate(
        stormProjection({
          influentFlow_m3h: q.value!,
          rasFlow_m3h: qr.value!,
          mlss_gL: x.value!,
          svi_mLg: svi.value!,
          aerationVolume_m3: volume,
          clarifierArea_m2: area,
          stormFlow_m3h: stormFlow.value!,
          xrFactor: s['ras.xr_factor'],
          clarifierMass_kg: cm0.value!,
          checks: { minMlss_gL: s['storm.min_mlss_gL'], maxStoredFraction: s['storm.max_stored_fraction'], maxBlanketRise_m: s['storm.max_blanket_rise_m'] },
        }),
        ...stormIns,
      );
    }
    const sp = (pick: (p: NonNullable<typeof storm.value>) => number, unit: string): FigureOut =>
      storm.value === null ? fo(unavailable(...storm.reasons), unit) : fo({ value: pick(storm.value), quality: storm.quality, reasons: storm.reasons }, unit);
    trainsOut.push({
      code: t.code,
      influentFlow_m3h: fo(q, 'm3/h'),
      rasFlow_m3h: fo(qr, 'm3/h'),
      wasFlow_m3h: fo(qw, 'm3/h'),
      mlss_gL: fo(x, 'g/L'),
      rasPumpCapacity_m3h: cap,
      ras: {
        rasConcMax_gL: fo(xrMax, 'g/L'),
        requiredRasConc_gL: mf(m?.requiredRasConc_gL, 'g/L'),
        concentrationMargin: mf(m?.concentrationMargin, '-'),
        minRecycleRatio: mf(m?.minRecycleRatio, '-'),
        minRasFlow_m3h: mf(m?.minRasFlow_m3h, 'm3/h'),
        pumpMargin: mf(m?.pumpMargin, '-'),
        concentrationLimitFlow_m3h: mf(m?.concentrationLimitFlow_m3h, 'm3/h'),
        pumpLimitFlow_m3h: mf(m?.pumpLimitFlow_m3h, 'm3/h'),
      },
      storm: {
        stormFlow_m3h: fo(stormFlow, 'm3/h'),
        equilibriumMlss_gL: sp((p) => p.equilibriumMlss_gL, 'g/L'),
        sludgeToClarifiers_kg: sp((p) => p.sludgeToClarifiers_kg, 'kg'),
        blanketRise_m: sp((p) => p.blanketRise_m, 'm'),
        storedFraction: sp((p) => p.storedFraction, '-'),
        checks: storm.value?.checks ?? [],
      },
    });
  }

  // SRT: rolling (flow-weighted over the window) and dynamic, plant totals of the trains.
  const plantSeries = (pick: (p: (typeof srtParts)[number]) => Map<number, number>) => sumSeries(srtParts.map(pick));
  const aerS = plantSeries((p) => p.aer);
  const clarS = plantSeries((p) => p.clar);
  const lossS = sumSeries(
    srtParts.map((p) =>
      joinSeries(p.xe ? [p.qw, p.xw, p.qe, p.xe] : [p.qw, p.xw, p.qe], ([qwv, xwv, qev, xev]) => qwv! * xwv! + qev! * (xev ?? 0)),
    ),
  );
  const effMissing = srtParts.some((p) => p.xe === null);
  const toTs = (m: Map<number, number>): TimeSeries => [...m].map(([ts_ms, value]) => ({ ts_ms, value })).sort((a, b) => a.ts_ms - b.ts_ms);
  // The loss series is passed as Q_W·X_W with X_W = 1 and no effluent term: rollingSrt only
  // needs the sum Q_W·X_W + Q_e·X_e, which lossS already is, per minute and over all trains.
  const ones = toTs(new Map([...lossS.keys()].map((t) => [t, 1])));
  const zeros = toTs(new Map([...lossS.keys()].map((t) => [t, 0])));
  const roll = rollingSrt({
    aerationMass_kg: toTs(aerS),
    clarifierMass_kg: toTs(clarS),
    wasFlow_m3h: toTs(lossS),
    wasTss_gL: ones,
    effluentFlow_m3h: zeros,
    effluentTss_gL: zeros,
    end_ms: clock,
    window_h: s['srt.window_h'],
  });
  const effReason = effMissing ? ['effluent TSS not measured in some train: effluent solids taken as 0 (SRT overstated)'] : [];
  const withEff = (f: Figure<number>) => (effMissing && f.value !== null ? propagate(f, { quality: 'estimated', reasons: effReason }) : f);
  const dynSamples = [...aerS]
    .filter(([t]) => clarS.has(t) && lossS.has(t))
    .map(([ts_ms, a]) => ({ ts_ms, mass_kg: a + clarS.get(ts_ms)!, production_kgh: lossS.get(ts_ms)! }))
    .sort((a, b) => a.ts_ms - b.ts_ms);
  let dyn: Figure<number>;
  if (dynSamples.length < 2) dyn = unavailable(`fewer than two complete minutes of inventory and wasting in the ${s['srt.window_h']} h window`);
  else {
    const d = dynamicSrt(dynSamples);
    const last = d.value?.[d.value.length - 1];
    const span_h = (dynSamples[dynSamples.length - 1]!.ts_ms - dynSamples[0]!.ts_ms) / 3_600_000;
    dyn =
      last === undefined
        ? unavailable(...d.reasons)
        : estimated(last.srt_d, ...d.reasons, `integrated over ${span_h.toFixed(1)} h from the steady-state age at the window start (Takács et al. 2008, reconstructed [M])`);
    dyn = withEff(dyn);
  }
  // WAS advice for the target SRT from the present totals (total inventory, design §3 item 5).
  const qwTot = sumFigures(trainState.map((st) => st.qw), 'WAS pumps');
  const qeTot = sumFigures(
    trainState.map((st) => over([st.q, st.qw], (qv, qwv) => Math.max(0, qv - qwv))),
    'trains',
  );
  const xeW = over([qeTot, ...trainState.flatMap((st) => [st.q, st.qw, st.xe])], (qe, ...rest) => {
    if (!(qe > 0)) return 0;
    let acc = 0;
    for (let i = 0; i < rest.length; i += 3) acc += Math.max(0, rest[i]! - rest[i + 1]!) * rest[i + 2]!;
    return acc / qe;
  });
  const xwW = over([qwTot, ...trainState.flatMap((st) => [st.qw, st.xr])], (qwt, ...rest) => {
    let acc = 0;
    let n = 0;
    for (let i = 0; i < rest.length; i += 2) {
      acc += qwt > 0 ? rest[i]! * rest[i + 1]! : rest[i + 1]!;
      n += qwt > 0 ? rest[i]! : 1;
    }
    return acc / n;
  });
  const target = s['srt.target_d'];
  const wasAdvice = over([totalMass, qeTot, xeW, xwW], (mt, qe, xe, xw) => wasFlowForTargetSrt_m3h(mt, target, qe, xe, xw));

  const data: BalanceData = {
    inventory: { aerationMass_kg: fo(aerationMass, 'kg'), clarifierMass_kg: fo(clarifierMass, 'kg'), totalMass_kg: fo(totalMass, 'kg'), storedFraction: fo(storedFraction, '-') },
    basins: basinsOut,
    clarifiers: clarifiersOut,
    trains: trainsOut,
    settleability: { svi_mLg: fo(svi, 'mL/g'), kind: inp.svi?.kind ?? null, sampledAt: inp.svi ? iso(inp.svi.sampledAt_ms) : null },
    storm: { peakFlow_m3h: fo(peak, 'm3/h'), source: peakSource },
    srt: {
      total_d: fo(withEff(roll.total_d), 'd'),
      aeration_d: fo(withEff(roll.aeration_d), 'd'),
      coverage: Math.round(roll.coverage * 1000) / 1000,
      dynamic_d: fo(dyn, 'd'),
      target_d: target,
      wasAdvice_m3h: fo(wasAdvice, 'm3/h'),
      wasFlow_m3h: fo(qwTot, 'm3/h'),
    },
    caution: OPERATOR_CAUTION,
  };
  const headline: Quality[] = [data.inventory.totalMass_kg.quality, data.srt.total_d.quality, ...data.trains.map((t) => t.ras.concentrationMargin.quality), ...data.trains.map((t) => t.storm.equilibriumMlss_gL.quality)];
  return {
    plantId: layout.plantId,
    ts: iso(now_ms),
    quality: worstQuality(...headline),
    data,
    inputs: {
      signals: inputs,
      plantClock: plantClock_ms === null ? null : iso(plantClock_ms),
      lastReceivedAt: inp.lastReceived_ms === null ? null : iso(inp.lastReceived_ms),
      ingestAge_s: inp.lastReceived_ms === null ? null : Math.round(Math.max(0, now_ms - inp.lastReceived_ms) / 100) / 10,
      svi: inp.svi ? { kind: inp.svi.kind, value_mLg: inp.svi.value_mLg, sampledAt: iso(inp.svi.sampledAt_ms) } : null,
    },
  };
}
