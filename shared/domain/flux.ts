/**
 * Solids-flux theory for the secondary clarifier with Vesilind settling (Keinath et al. 1977;
 * Keinath 1985; WEF Manual of Practice 8 [M for the book]) and the rule-of-thumb maximum
 * return concentration. Units: u, v0 m/h; k L/g; X g/L; flux kg/(m²·h).
 */
import { good, unavailable, type Figure } from './quality.js';
import type { VesilindParams } from './settling.js';

/**
 * Lower real branch W₋₁(x) of the Lambert W function (w·e^w = x, w ≤ −1) for x in [−1/e, 0),
 * by Halley's iteration (Corless et al. 1996, "On the Lambert W function", Adv. Comput. Math.
 * 5:329–359, eq. 5.9), started from the branch-point series near −1/e and from the asymptotic
 * series ln(−x) − ln(−ln(−x)) near 0 (both from the same paper). Returns null outside the domain.
 */
export function lambertWm1(x: number): number | null {
  const e = Math.E;
  if (!Number.isFinite(x) || x < -1 / e - 1e-15 || x >= 0) return null;
  if (x <= -1 / e) return -1;
  let w: number;
  if (x < -0.25) {
    const p = -Math.sqrt(2 * (1 + e * x));
    w = -1 + p - (p * p) / 3 + (11 / 72) * p * p * p;
  } else {
    const l1 = Math.log(-x);
    const l2 = Math.log(-l1);
    w = l1 - l2 + l2 / l1;
  }
  for (let i = 0; i < 100; i++) {
    const ew = Math.exp(w);
    const f = w * ew - x;
    const wp1 = w + 1;
    if (wp1 === 0) break;
    const denom = ew * wp1 - ((w + 2) * f) / (2 * wp1);
    const dw = f / denom;
    w -= dw;
    if (w > -1) w = -1;
    if (Math.abs(dw) <= 1e-15 * Math.max(1, Math.abs(w))) break;
  }
  return w;
}

/** Total solids flux G(X) = (v0·e^(−k·X) + u)·X [kg/(m²·h)]: gravity plus bulk underflow (Keinath et al. 1977). */
export function totalFlux_kgm2h(x_gL: number, underflowRate_mh: number, p: VesilindParams): number {
  return (p.v0_mh * Math.exp(-p.k_Lg * x_gL) + underflowRate_mh) * x_gL;
}

export interface LimitingFlux {
  /** Limiting concentration X_L [g/L] (local minimum of the total flux curve). */
  limitingConc_gL: number;
  /** Limiting flux G_L [kg/(m²·h)]. */
  limitingFlux_kgm2h: number;
  /** Maximum underflow concentration G_L/u [g/L]. */
  maxUnderflowConc_gL: number;
}

/**
 * Limiting solids flux for underflow velocity u with Vesilind settling (solids-flux theory,
 * Keinath et al. 1977; closed form via the Lambert W function): X_L solves
 * e^(−k·X)·(k·X − 1) = u/v0 on the branch X > 2/k, X_L = (1 − W₋₁(−e·u/v0))/k,
 * G_L = (v0·e^(−k·X_L) + u)·X_L and the maximum underflow concentration is G_L/u. The local
 * minimum exists only while u < v0·e⁻²; otherwise the total flux rises monotonically and the
 * result is unavailable with that reason (thickening does not limit).
 */
export function limitingFlux(underflowRate_mh: number, p: VesilindParams): Figure<LimitingFlux> {
  const u = underflowRate_mh;
  if (!Number.isFinite(u) || !Number.isFinite(p.v0_mh) || !Number.isFinite(p.k_Lg)) return unavailable('inputs must be finite');
  if (!(p.v0_mh > 0) || !(p.k_Lg > 0)) return unavailable('Vesilind v0 and k must be positive');
  if (!(u > 0)) return unavailable('no underflow (u ≤ 0): limiting flux and maximum underflow concentration are undefined');
  const uMax = p.v0_mh * Math.exp(-2);
  if (u >= uMax) {
    return unavailable(
      `underflow rate u = ${u.toPrecision(4)} m/h is not below v0·e⁻² = ${uMax.toPrecision(4)} m/h: the total flux curve has no minimum, so no limiting flux exists`,
    );
  }
  const w = lambertWm1((-Math.E * u) / p.v0_mh);
  if (w === null) return unavailable('Lambert W₋₁ outside its domain');
  const xl = (1 - w) / p.k_Lg;
  const gl = totalFlux_kgm2h(xl, u, p);
  return good({ limitingConc_gL: xl, limitingFlux_kgm2h: gl, maxUnderflowConc_gL: gl / u });
}

/**
 * Maximum return-sludge concentration by the rule of thumb X_R,max ≈ factor/SVI [g/L] with
 * factor 1200 mL/L by default (1000 mL/L of settled sludge with about 20 % margin) — common
 * practice of the trade, no single published source; the factor is a plant setting.
 */
export function rasConcMaxRuleOfThumb_gL(svi_mLg: number, factor = 1200): Figure<number> {
  if (!Number.isFinite(svi_mLg) || svi_mLg <= 0) return unavailable('SVI must be a positive finite number');
  if (!Number.isFinite(factor) || factor <= 0) return unavailable('rule-of-thumb factor must be a positive finite number');
  return good(factor / svi_mLg);
}

/**
 * Maximum underflow concentration from solids-flux theory, G_L/u [g/L] (Keinath et al. 1977),
 * a thin wrapper over {@link limitingFlux} for callers that need only this figure.
 */
export function rasConcMaxFlux_gL(underflowRate_mh: number, p: VesilindParams): Figure<number> {
  const lf = limitingFlux(underflowRate_mh, p);
  return lf.value === null ? unavailable(...lf.reasons) : { value: lf.value.maxUnderflowConc_gL, quality: lf.quality, reasons: lf.reasons };
}
