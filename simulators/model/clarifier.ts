/**
 * One simulated secondary clarifier: the layered Takács settler of shared/domain/settler.ts
 * (BSM1 rules, Alex et al. 2008) with the plant's geometry and an SVI-dependent settling
 * curve (settleability.ts). The wrapper only holds state and reads results; the physics is
 * the shared settler's.
 *
 * The plant model integrates basin and clarifier together (plant-model.ts) from
 * settlerDerivatives rather than calling stepSettler, because the RAS taken out of the floor
 * layer must be exactly the RAS put into the basin in every step for the solids balance to
 * close; stepSettler sub-steps internally and would hide the underflow concentration of its
 * sub-steps.
 */
import {
  BSM1_SETTLER,
  blanketHeight_m,
  settlerDerivatives,
  settlerMass_kg,
  solveSettlerSteadyState,
  type SettlerConfig,
  type SettlerInputs,
  type TakacsParams,
} from '../../shared/domain/settler.js';

export interface ClarifierGeometry {
  area_m2: number;
  depth_m: number;
  /** Number of layers and feed layer default to the BSM1 discretisation (10 layers, feed into layer 5). */
  layers?: number;
  feedLayer?: number;
}

export class Clarifier {
  readonly layers_gL: Float64Array;
  private readonly d: Float64Array;
  cfg: SettlerConfig;

  constructor(geometry: ClarifierGeometry, takacs: TakacsParams, initial_gL?: ArrayLike<number>) {
    this.cfg = {
      area_m2: geometry.area_m2,
      depth_m: geometry.depth_m,
      layers: geometry.layers ?? BSM1_SETTLER.layers,
      feedLayer: geometry.feedLayer ?? BSM1_SETTLER.feedLayer,
      takacs,
    };
    this.layers_gL = new Float64Array(this.cfg.layers);
    if (initial_gL) this.layers_gL.set(initial_gL);
    this.d = new Float64Array(this.cfg.layers);
  }

  setTakacs(p: TakacsParams): void {
    this.cfg = { ...this.cfg, takacs: p };
  }

  /** dX/dt per layer [g/L/h] for the given flows, from the shared settler (buffer reused). */
  derivatives(inp: SettlerInputs): Float64Array {
    return settlerDerivatives(this.cfg, inp, this.layers_gL, this.d);
  }

  /** Replaces the profile by the settler's steady state for constant inputs. */
  settleToSteadyState(inp: SettlerInputs): boolean {
    const r = solveSettlerSteadyState(this.cfg, inp, { tol: 1e-9 });
    this.layers_gL.set(r.layers_gL);
    return r.converged;
  }

  /** Effluent TSS = surface layer [g/L] (BSM1 convention). */
  get effluentTss_gL(): number {
    return this.layers_gL[0]!;
  }

  /** Underflow TSS = floor layer [g/L] (BSM1 convention). */
  get underflowTss_gL(): number {
    return this.layers_gL[this.cfg.layers - 1]!;
  }

  /** Layer volume [m³]. */
  get layerVolume_m3(): number {
    return (this.cfg.area_m2 * this.cfg.depth_m) / this.cfg.layers;
  }

  blanketLevel_m(threshold_gL: number): number {
    return blanketHeight_m(this.cfg, this.layers_gL, threshold_gL);
  }

  mass_kg(): number {
    return settlerMass_kg(this.cfg, this.layers_gL);
  }
}
