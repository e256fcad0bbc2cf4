/**
 * Dynamic solids model of the invented plant: pure, fixed step, seeded.
 *
 * Per train: one completely mixed aeration basin and one layered clarifier in a loop.
 *   basin:     V·dX/dt = Q_R·X_u − (Q + Q_R)·X + P          (influent solids are folded into P)
 *   clarifier: layered Takács/BSM1 settler fed (Q + Q_R) at X, underflow Q_R + Q_W at X_u,
 *              effluent Q − Q_W at X_e (surface layer)
 *   P = Y_obs · BOD load  — net sludge production; without wasting the inventory grows.
 * RAS: ratio control Q_R = ratio·Q, limited to [min, pump capacity], zero while tripped.
 * WAS: from the underflow, continuous at a set point or on a timer, limited to pump capacity.
 *
 * All state advances together by explicit Euler with one fixed step (default 5 s, below the
 * explicit stability bound of the 0.4 m BSM1 layers, ≈ 20 s at SVI 80 and longer for worse
 * sludge). Because the basin gains exactly Q_R·X_u·dt from the same floor-layer value the
 * settler loses, the solids balance closes to round-off: inventory change = production −
 * wasting − effluent solids, each accumulated with the same step (see accounting).
 */
import { Prng, streamSeed } from './prng.js';
import { Influent, type InfluentNow } from './influent.js';
import { Clarifier } from './clarifier.js';
import { takacsForSvi } from './settleability.js';
import type { Scenario } from '../scenarios/scenario.schema.js';
import type { DemoPlant, SignalKind } from '../plant/demo-plant.js';

export interface PlantModelOptions {
  seed: number;
  /** Fixed model step [s]. */
  step_s?: number;
  /** Hour of day at simulated time zero (diurnal phase). */
  startHourOfDay?: number;
  /** Layer concentration that marks the blanket top [g/L] (a blanket detector's set point). */
  blanketThreshold_gL?: number;
  /**
   * Unequal influent split between trains, as a fraction: train i receives
   * (1 + imbalance·(n−1−2i)/(n−1))/n of the flow. Real splitter boxes are never exact, and a
   * small difference keeps the two trains' signals from being identical copies. Default 0.03.
   */
  splitImbalance?: number;
}

export interface TrainSnapshot {
  train: string;
  basin: string;
  clarifier: string;
  rasPump: string;
  wasPump: string;
  influentFlow_m3h: number;
  mlss_gL: number;
  rasFlow_m3h: number;
  rasRunning: boolean;
  wasFlow_m3h: number;
  underflowTss_gL: number;
  effluentTss_gL: number;
  blanketLevel_m: number;
  basinMass_kg: number;
  clarifierMass_kg: number;
}

export interface PlantSnapshot {
  t_h: number;
  influentFlow_m3h: number;
  effluentFlow_m3h: number;
  svi_mLg: number;
  trains: TrainSnapshot[];
}

/** Cumulative solids accounting since t = 0 [kg]. */
export interface SolidsAccount {
  production_kg: number;
  wasted_kg: number;
  effluent_kg: number;
}

interface TrainState {
  code: string;
  basinCode: string;
  volume_m3: number;
  x_gL: number;
  clarifier: Clarifier;
  clarifierCode: string;
  ras: { code: string; capacity_m3h: number; flow_m3h: number; running: boolean };
  was: { code: string; capacity_m3h: number; flow_m3h: number };
  influent_m3h: number;
}

interface SviSegment { t0: number; v0: number; t1: number; v1: number }

export class PlantModel {
  readonly step_h: number;
  readonly blanketThreshold_gL: number;
  private t = 0;
  private readonly influent: Influent;
  private readonly trains: TrainState[];
  private readonly sviSegments: SviSegment[] = [];
  private currentSvi = Number.NaN;
  private readonly account: SolidsAccount = { production_kg: 0, wasted_kg: 0, effluent_kg: 0 };
  private plantInfluent_m3h = 0;
  private readonly splits: number[];

  constructor(
    readonly plant: DemoPlant,
    readonly scenario: Scenario,
    opts: PlantModelOptions,
  ) {
    this.step_h = (opts.step_s ?? 5) / 3600;
    if (!(this.step_h > 0) || this.step_h > 15 / 3600) throw new RangeError('model step must be in (0, 15] s (explicit stability of the layered settler)');
    this.blanketThreshold_gL = opts.blanketThreshold_gL ?? 1.0;
    this.influent = new Influent(scenario.influent, new Prng(streamSeed(opts.seed, 'influent')), opts.startHourOfDay ?? 0);

    let v = scenario.svi.initial_mLg;
    for (const c of [...scenario.svi.changes].sort((a, b) => a.at_h - b.at_h)) {
      const v0 = this.sviFromSegments(c.at_h, v);
      this.sviSegments.push({ t0: c.at_h, v0, t1: c.at_h + c.over_h, v1: c.to_mLg });
      v = c.to_mLg;
    }
    const svi0 = this.sviAt(0);
    const takacs = takacsForSvi(svi0);

    for (const trip of scenario.ras.trips) {
      if (!plant.trains.some((tr) => tr.pumps.some((p) => p.code === trip.pump && p.kind === 'ras'))) {
        throw new RangeError(`scenario trips unknown RAS pump "${trip.pump}"`);
      }
    }

    this.trains = plant.trains.map((tr) => {
      const basin = tr.basins[0]!;
      const cl = tr.clarifiers[0]!;
      const ras = tr.pumps.find((p) => p.kind === 'ras')!;
      const was = tr.pumps.find((p) => p.kind === 'was')!;
      return {
        code: tr.code,
        basinCode: basin.code,
        volume_m3: basin.volume_m3,
        x_gL: scenario.initial.mlss_gL,
        clarifier: new Clarifier({ area_m2: cl.area_m2 * cl.count, depth_m: cl.sideWaterDepth_m }, takacs),
        clarifierCode: cl.code,
        ras: { code: ras.code, capacity_m3h: ras.capacity_m3h, flow_m3h: 0, running: true },
        was: { code: was.code, capacity_m3h: was.capacity_m3h, flow_m3h: 0 },
        influent_m3h: 0,
      };
    });
    const n = this.trains.length;
    const imb = opts.splitImbalance ?? 0.03;
    this.splits = this.trains.map((_, i) => (n === 1 ? 1 : (1 + (imb * (n - 1 - 2 * i)) / (n - 1)) / n));
    this.currentSvi = svi0;
    // Start the clarifiers from their steady state for the initial flows, so a scenario does
    // not open with an artificial blanket transient.
    this.updateControls();
    for (const tr of this.trains) tr.clarifier.settleToSteadyState(this.settlerInputs(tr));
  }

  get time_h(): number {
    return this.t;
  }

  private sviFromSegments(t_h: number, fallback: number): number {
    let v = fallback;
    for (const s of this.sviSegments) {
      if (t_h < s.t0) break;
      v = t_h >= s.t1 || s.t1 === s.t0 ? s.v1 : s.v0 + ((s.v1 - s.v0) * (t_h - s.t0)) / (s.t1 - s.t0);
    }
    return v;
  }

  /** Scenario SVI [mL/g] at simulated time t_h (piecewise-linear ramps). */
  sviAt(t_h: number): number {
    return this.sviFromSegments(t_h, this.scenario.svi.initial_mLg);
  }

  private rasTripped(code: string, t_h: number): boolean {
    return this.scenario.ras.trips.some((tr) => tr.pump === code && t_h >= tr.at_h && t_h < tr.at_h + tr.duration_h);
  }

  private wasFlow(t_h: number): number {
    const w = this.scenario.was;
    if (w.mode === 'flow') return w.flowPerTrain_m3h;
    const minute = (t_h * 60) % w.period_min;
    return minute < w.on_min ? w.flowPerTrain_m3h : 0;
  }

  /** Sets influent split, RAS and WAS flows for the current time. */
  private updateControls(): InfluentNow {
    const inf = this.influent.at(this.t);
    this.plantInfluent_m3h = inf.flow_m3h;
    const ras = this.scenario.ras;
    for (const [i, tr] of this.trains.entries()) {
      tr.influent_m3h = inf.flow_m3h * this.splits[i]!;
      const tripped = this.rasTripped(tr.ras.code, this.t);
      tr.ras.running = !tripped;
      tr.ras.flow_m3h = tripped ? 0 : Math.min(tr.ras.capacity_m3h, Math.max(ras.minFlowPerTrain_m3h, ras.ratio * tr.influent_m3h));
      // Wasting can never exceed half the train's flow (the effluent flow must stay positive).
      tr.was.flow_m3h = Math.min(tr.was.capacity_m3h, this.wasFlow(this.t), 0.5 * tr.influent_m3h);
    }
    return inf;
  }

  private settlerInputs(tr: TrainState) {
    return {
      feedFlow_m3h: tr.influent_m3h + tr.ras.flow_m3h,
      feedTss_gL: tr.x_gL,
      underflowFlow_m3h: tr.ras.flow_m3h + tr.was.flow_m3h,
    };
  }

  /** One fixed model step. */
  step(): void {
    const dt = this.step_h;
    const svi = this.sviAt(this.t);
    if (svi !== this.currentSvi) {
      const p = takacsForSvi(svi);
      for (const tr of this.trains) tr.clarifier.setTakacs(p);
      this.currentSvi = svi;
    }
    const inf = this.updateControls();
    const production_kgh = this.scenario.yield_gTSSgBOD * inf.bodLoad_kgh;

    for (const [i, tr] of this.trains.entries()) {
      // Each train receives its share of the load with its share of the flow.
      const trainProduction_kgh = production_kgh * this.splits[i]!;
      const cl = tr.clarifier;
      const inp = this.settlerInputs(tr);
      const xu = cl.underflowTss_gL;
      const xe = cl.effluentTss_gL;
      const d = cl.derivatives(inp);
      // Basin balance [kg/h] with g/L = kg/m³.
      const dBasin_kgh = tr.ras.flow_m3h * xu - inp.feedFlow_m3h * tr.x_gL + trainProduction_kgh;
      for (let i = 0; i < d.length; i++) cl.layers_gL[i] = cl.layers_gL[i]! + dt * d[i]!;
      tr.x_gL += (dt * dBasin_kgh) / tr.volume_m3;
      this.account.production_kg += dt * trainProduction_kgh;
      this.account.wasted_kg += dt * tr.was.flow_m3h * xu;
      this.account.effluent_kg += dt * (tr.influent_m3h - tr.was.flow_m3h) * xe;
    }
    this.influent.advance(dt);
    this.t += dt;
  }

  /** Steps until simulated time reaches t_h (whole steps; never beyond by more than one step). */
  advanceTo(t_h: number): number {
    let n = 0;
    while (this.t + this.step_h <= t_h + 1e-12) {
      this.step();
      n++;
    }
    return n;
  }

  /** Total solids held in basins and clarifiers [kg]. */
  inventory_kg(): number {
    let m = 0;
    for (const tr of this.trains) m += tr.volume_m3 * tr.x_gL + tr.clarifier.mass_kg();
    return m;
  }

  accounting(): SolidsAccount {
    return { ...this.account };
  }

  /** Layer profile of a clarifier (copy), top to bottom [g/L]. */
  clarifierProfile(code: string): number[] {
    const tr = this.trains.find((t) => t.clarifierCode === code);
    if (!tr) throw new RangeError(`unknown clarifier ${code}`);
    return Array.from(tr.clarifier.layers_gL);
  }

  snapshot(): PlantSnapshot {
    const trains = this.trains.map((tr) => ({
      train: tr.code,
      basin: tr.basinCode,
      clarifier: tr.clarifierCode,
      rasPump: tr.ras.code,
      wasPump: tr.was.code,
      influentFlow_m3h: tr.influent_m3h,
      mlss_gL: tr.x_gL,
      rasFlow_m3h: tr.ras.flow_m3h,
      rasRunning: tr.ras.running,
      wasFlow_m3h: tr.was.flow_m3h,
      underflowTss_gL: tr.clarifier.underflowTss_gL,
      effluentTss_gL: tr.clarifier.effluentTss_gL,
      blanketLevel_m: tr.clarifier.blanketLevel_m(this.blanketThreshold_gL),
      basinMass_kg: tr.volume_m3 * tr.x_gL,
      clarifierMass_kg: tr.clarifier.mass_kg(),
    }));
    const effluent = trains.reduce((s, t) => s + t.influentFlow_m3h - t.wasFlow_m3h, 0);
    return { t_h: this.t, influentFlow_m3h: this.plantInfluent_m3h, effluentFlow_m3h: effluent, svi_mLg: this.currentSvi, trains };
  }

  /** The true (noise-free) value of a process signal, in the tag's engineering unit. */
  signalValue(kind: SignalKind, target: string): number {
    if (kind === 'plant.influentFlow') return this.plantInfluent_m3h;
    if (kind === 'plant.effluentFlow') return this.trains.reduce((s, t) => s + t.influent_m3h - t.was.flow_m3h, 0);
    for (const tr of this.trains) {
      switch (kind) {
        case 'basin.influentFlow':
          if (tr.basinCode === target) return tr.influent_m3h;
          break;
        case 'basin.mlss':
          if (tr.basinCode === target) return tr.x_gL;
          break;
        case 'clarifier.blanketLevel':
          if (tr.clarifierCode === target) return tr.clarifier.blanketLevel_m(this.blanketThreshold_gL);
          break;
        case 'clarifier.underflowTss':
          if (tr.clarifierCode === target) return tr.clarifier.underflowTss_gL;
          break;
        case 'clarifier.effluentTss':
          if (tr.clarifierCode === target) return tr.clarifier.effluentTss_gL * 1000;
          break;
        case 'pump.flow':
          if (tr.ras.code === target) return tr.ras.flow_m3h;
          if (tr.was.code === target) return tr.was.flow_m3h;
          break;
        case 'pump.running':
          if (tr.ras.code === target) return tr.ras.running ? 1 : 0;
          if (tr.was.code === target) return tr.was.flow_m3h > 0 ? 1 : 0;
          break;
      }
    }
    throw new RangeError(`no signal ${kind} for ${target}`);
  }
}
