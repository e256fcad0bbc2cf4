/**
 * Small numeric helpers for the process math: bisection and the "influent flow at which a
 * margin reaches zero" search used by the state point and RAS margin reports.
 */

/**
 * Bisection root finder (e.g. Press et al., Numerical Recipes, 3rd ed. 2007, §9.1): given
 * f(lo) and f(hi) of opposite sign, halves the bracket until it is narrower than
 * tol·max(1, |x|) or maxIter is reached. Returns null when the bracket does not straddle a root
 * or a function value is not finite.
 */
export function bisect(f: (x: number) => number, lo: number, hi: number, tol = 1e-12, maxIter = 200): number | null {
  let flo = f(lo);
  const fhi = f(hi);
  if (!Number.isFinite(flo) || !Number.isFinite(fhi)) return null;
  if (flo === 0) return lo;
  if (fhi === 0) return hi;
  if (Math.sign(flo) === Math.sign(fhi)) return null;
  let a = lo;
  let b = hi;
  for (let i = 0; i < maxIter; i++) {
    const mid = 0.5 * (a + b);
    const fm = f(mid);
    if (!Number.isFinite(fm)) return null;
    if (fm === 0 || b - a < tol * Math.max(1, Math.abs(mid))) return mid;
    if (Math.sign(fm) === Math.sign(flo)) {
      a = mid;
      flo = fm;
    } else {
      b = mid;
    }
  }
  return 0.5 * (a + b);
}

export type ZeroFlowResult = { flow_m3h: number; reason?: undefined } | { flow_m3h: null; reason: string };

/**
 * Influent flow [m³/h] at which a margin m(Q), assumed to fall as Q rises, reaches zero:
 * brackets the crossing by doubling an upper bound from `start_m3h` (up to `limit_m3h`),
 * then bisects. Reports a reason instead of a flow when the margin is already ≤ 0 at zero
 * flow, or stays positive up to the search limit. Returns null values with reasons, never NaN.
 */
export function flowAtZeroMargin(
  margin: (flow_m3h: number) => number | null,
  start_m3h: number,
  limit_m3h = 1e8,
): ZeroFlowResult {
  const f = (q: number): number => {
    const m = margin(q);
    return m === null ? Number.NaN : m;
  };
  const m0 = f(0);
  if (!Number.isFinite(m0)) return { flow_m3h: null, reason: 'margin cannot be computed at zero influent flow' };
  if (m0 <= 0) return { flow_m3h: null, reason: 'margin is already exhausted at zero influent flow' };
  let hi = Math.max(start_m3h, 1);
  let mh = f(hi);
  while (Number.isFinite(mh) && mh > 0 && hi < limit_m3h) {
    hi *= 2;
    mh = f(hi);
  }
  if (!Number.isFinite(mh)) return { flow_m3h: null, reason: 'margin cannot be computed while searching for its zero' };
  if (mh > 0) return { flow_m3h: null, reason: `margin stays positive up to ${limit_m3h} m³/h influent flow` };
  const root = bisect(f, 0, hi);
  return root === null ? { flow_m3h: null, reason: 'zero crossing of the margin could not be bracketed' } : { flow_m3h: root };
}
