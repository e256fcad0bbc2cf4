/**
 * State point analysis of a secondary clarifier (Keinath 1985, "Operational dynamics and
 * control of secondary clarifiers", JWPCF 57:770 [M for the citation details]; solids-flux
 * theory of Keinath et al. 1977) with Vesilind settling.
 */
import { limitingFlux } from './flux.js';
import { flowAtZeroMargin } from './numeric.js';
import { good, propagate, unavailable, type Figure, type QualityInfo } from './quality.js';
import { vesilindVelocity_mh, type VesilindParams } from './settling.js';

export interface StatePointInputs {
  influentFlow_m3h: number;
  rasFlow_m3h: number;
  /** Waste flow drawn from the underflow; 0 when omitted. */
  wasFlow_m3h?: number;
  mlss_gL: number;
  clarifierArea_m2: number;
  vesilind: VesilindParams;
  /** Quality of the settling parameters (e.g. from a correlation); good when omitted. */
  settlingQuality?: QualityInfo;
}

export interface StatePoint {
  /** Surface overflow rate Q_e/A [m/h] (Q_e = Q − Q_W; = Q/A without wasting). */
  overflowRate_mh: Figure<number>;
  /** Applied solids loading (Q + Q_R)·X/A [kg/(m²·h)]. */
  solidsLoading_kgm2h: Figure<number>;
  /** Underflow velocity (Q_R + Q_W)/A [m/h] (= Q_R/A without wasting). */
  underflowRate_mh: Figure<number>;
  limitingFlux_kgm2h: Figure<number>;
  limitingConc_gL: Figure<number>;
  maxUnderflowConc_gL: Figure<number>;
  /** x-intercept of the underflow line, (Q + Q_R)·X/(Q_R + Q_W) [g/L]. */
  requiredUnderflowConc_gL: Figure<number>;
  /** 1 − SLR/G_L [-]; negative means the state point lies above the limiting flux. */
  thickeningMargin: Figure<number>;
  /** 1 − SOR/vs(X) [-]; negative means the overflow line lies above the settling curve at X. */
  clarificationMargin: Figure<number>;
  /** Influent flow at which the thickening margin reaches zero, Q_R and Q_W held [m³/h]. */
  thickeningLimitFlow_m3h: Figure<number>;
  /** Influent flow at which the clarification margin reaches zero, Q_R and Q_W held [m³/h]. */
  clarificationLimitFlow_m3h: Figure<number>;
}

function marginsAt(q: number, inp: StatePointInputs): { thickening: number | null; clarification: number | null } {
  const qw = inp.wasFlow_m3h ?? 0;
  const a = inp.clarifierArea_m2;
  const u = (inp.rasFlow_m3h + qw) / a;
  const lf = limitingFlux(u, inp.vesilind);
  const slr = ((q + inp.rasFlow_m3h) * inp.mlss_gL) / a;
  const sor = Math.max(0, q - qw) / a;
  const vs = vesilindVelocity_mh(inp.mlss_gL, inp.vesilind);
  return {
    thickening: lf.value ? 1 - slr / lf.value.limitingFlux_kgm2h : null,
    clarification: vs > 0 ? 1 - sor / vs : null,
  };
}

/**
 * State point analysis (Keinath 1985; Keinath et al. 1977): overflow rate SOR = Q_e/A, solids
 * loading SLR = (Q + Q_R)·X/A, underflow rate u = (Q_R + Q_W)/A, limiting flux G_L and
 * concentration X_L by the Lambert-W closed form, maximum underflow concentration G_L/u,
 * required underflow concentration, thickening margin 1 − SLR/G_L, clarification margin
 * 1 − SOR/vs(X), and the influent flows at which each margin reaches zero, found by bisection
 * with the return and waste flows held. Every figure carries the settling parameters' quality.
 */
export function statePoint(inp: StatePointInputs): StatePoint {
  const qw = inp.wasFlow_m3h ?? 0;
  const { influentFlow_m3h: q, rasFlow_m3h: qr, mlss_gL: x, clarifierArea_m2: a } = inp;
  const sq: QualityInfo = inp.settlingQuality ?? { quality: 'good', reasons: [] };
  const bad = (r: string): StatePoint => {
    const u = unavailable<number>(r);
    return {
      overflowRate_mh: u, solidsLoading_kgm2h: u, underflowRate_mh: u, limitingFlux_kgm2h: u, limitingConc_gL: u,
      maxUnderflowConc_gL: u, requiredUnderflowConc_gL: u, thickeningMargin: u, clarificationMargin: u,
      thickeningLimitFlow_m3h: u, clarificationLimitFlow_m3h: u,
    };
  };
  if (![q, qr, qw, x, a].every((v) => Number.isFinite(v) && v >= 0)) return bad('flows, MLSS and area must be finite and ≥ 0');
  if (!(a > 0)) return bad('clarifier area must be positive');
  if (qw > q) return bad('waste flow exceeds influent flow: effluent flow would be negative');
  if (!(inp.vesilind.v0_mh > 0) || !(inp.vesilind.k_Lg > 0)) return bad('Vesilind v0 and k must be positive');

  const u = (qr + qw) / a;
  const lf = limitingFlux(u, inp.vesilind);
  const withS = (f: Figure<number>): Figure<number> => propagate(f, sq);
  const fromLf = (pick: (v: NonNullable<typeof lf.value>) => number): Figure<number> =>
    withS(lf.value ? good(pick(lf.value)) : unavailable(...lf.reasons));
  const m = marginsAt(q, inp);
  const limitFlow = (which: 'thickening' | 'clarification'): Figure<number> => {
    if (m[which] === null) return withS(unavailable(`${which} margin unavailable`));
    const r = flowAtZeroMargin((qq) => marginsAt(qq, inp)[which], Math.max(q, 1));
    return withS(r.flow_m3h === null ? unavailable(r.reason) : good(r.flow_m3h));
  };
  const under = qr + qw;
  return {
    overflowRate_mh: good((q - qw) / a),
    solidsLoading_kgm2h: good(((q + qr) * x) / a),
    underflowRate_mh: good(u),
    limitingFlux_kgm2h: fromLf((v) => v.limitingFlux_kgm2h),
    limitingConc_gL: fromLf((v) => v.limitingConc_gL),
    maxUnderflowConc_gL: fromLf((v) => v.maxUnderflowConc_gL),
    requiredUnderflowConc_gL: under > 0 ? good(((q + qr) * x) / under) : unavailable('no underflow: required underflow concentration undefined'),
    thickeningMargin: withS(m.thickening === null ? unavailable(...lf.reasons) : good(m.thickening)),
    clarificationMargin: withS(m.clarification === null ? unavailable('settling velocity at this MLSS is zero') : good(m.clarification)),
    thickeningLimitFlow_m3h: limitFlow('thickening'),
    clarificationLimitFlow_m3h: limitFlow('clarification'),
  };
}
