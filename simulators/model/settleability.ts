/**
 * How the scenario's SVI changes the simulated clarifier's settling.
 *
 * The simulator's settler is the Takács double-exponential model with the BSM1 parameters
 * (shared/domain/settler.ts). Those parameters describe one sludge; to let a scenario make the
 * sludge settle better or worse, the hindered-settling part of the curve is moved with SVI by
 * the Härtel & Pöpel (1992) Vesilind correlations (as implemented in the Modelica WasteWater
 * library, ASM1/SecClar/Haertel.mo; see REFERENCES.md):
 *
 *   v0(SVI) = 17.4·exp(−0.0113·SVI) + 3.931   [m/h]
 *   k(SVI)  = 1.043 − 0.9834·exp(−0.00581·SVI) [L/g]
 *
 * ASSUMPTION (ours, documented here and in the scenario docs): Takács' rh plays the role of
 * Vesilind's k in the hindered zone, so
 *   - the reference SVI of the BSM1 sludge is the SVI at which Härtel's k equals BSM1's rh
 *     (0.576 L/g), which is SVI_ref ≈ 128 mL/g;
 *   - rh(SVI) = k(SVI) (equal to BSM1's rh at SVI_ref);
 *   - v0 and v0' are scaled by v0(SVI)/v0(SVI_ref);
 *   - rp, fns and Xt (clarification zone) are left at the BSM1 values: SVI describes the
 *     settling of the blanket, not the capture of fines.
 * At SVI 250 this gives v0 × 0.62 and rh × 1.41, i.e. the blanket settles at a few percent of
 * its healthy speed at 8 g/L: filamentous bulking as plants see it.
 */
import { BSM1_TAKACS, type TakacsParams } from '../../shared/domain/settler.js';

/** Härtel & Pöpel (1992) Vesilind v0 [m/h] for an SVI [mL/g]. */
export function haertelV0_mh(svi_mLg: number): number {
  return 17.4 * Math.exp(-0.0113 * svi_mLg) + 3.931;
}

/** Härtel & Pöpel (1992) Vesilind k [L/g] for an SVI [mL/g]. */
export function haertelK_Lg(svi_mLg: number): number {
  return 1.043 - 0.9834 * Math.exp(-0.00581 * svi_mLg);
}

/** SVI [mL/g] at which Härtel's k equals BSM1's rh: the SVI we assign to the BSM1 sludge (≈ 128). */
export const BSM1_REFERENCE_SVI_mLg = -Math.log((1.043 - BSM1_TAKACS.rh_Lg) / 0.9834) / 0.00581;

/** Takács parameters for a sludge of the given SVI, by the relation documented above. */
export function takacsForSvi(svi_mLg: number, base: TakacsParams = BSM1_TAKACS): TakacsParams {
  if (!(svi_mLg > 0) || !Number.isFinite(svi_mLg)) throw new RangeError(`SVI must be a positive number, got ${svi_mLg}`);
  const v0Scale = haertelV0_mh(svi_mLg) / haertelV0_mh(BSM1_REFERENCE_SVI_mLg);
  const rhScale = haertelK_Lg(svi_mLg) / haertelK_Lg(BSM1_REFERENCE_SVI_mLg);
  return {
    v0Max_mh: base.v0Max_mh * v0Scale,
    v0_mh: base.v0_mh * v0Scale,
    rh_Lg: base.rh_Lg * rhScale,
    rp_Lg: base.rp_Lg,
    fns: base.fns,
    xt_gL: base.xt_gL,
  };
}
