/**
 * Steady-state solids balance around the secondary clarifier (textbook mass balance, e.g.
 * Metcalf & Eddy, Wastewater Engineering: Treatment and Resource Recovery, 5th ed. 2014, ch. 8
 * [M for the chapter]): (Q + Q_R)·X = (Q_R + Q_W)·X_R + Q_e·X_e with Q_e = Q − Q_W, waste drawn
 * from the underflow. Flows m³/h, concentrations g/L.
 */
import { good, unavailable, type Figure } from './quality.js';

export interface ClarifierBalanceInputs {
  influentFlow_m3h: number;
  rasFlow_m3h: number;
  mlss_gL: number;
  /** Waste flow drawn from the underflow; 0 when omitted. */
  wasFlow_m3h?: number;
  /** Effluent suspended solids; 0 when omitted. */
  effluentTss_gL?: number;
}

function finiteNonNeg(...xs: number[]): boolean {
  return xs.every((x) => Number.isFinite(x) && x >= 0);
}

/** Effluent flow Q_e = Q − Q_W [m³/h] (design §3); unavailable when the waste flow exceeds the influent. */
export function effluentFlow_m3h(influentFlow_m3h: number, wasFlow_m3h = 0): Figure<number> {
  if (!finiteNonNeg(influentFlow_m3h, wasFlow_m3h)) return unavailable('flows must be finite and ≥ 0');
  if (wasFlow_m3h > influentFlow_m3h) return unavailable('waste flow exceeds influent flow: effluent flow would be negative');
  return good(influentFlow_m3h - wasFlow_m3h);
}

/**
 * Required underflow (RAS) concentration X_R from the full steady-state clarifier balance
 * X_R = ((Q + Q_R)·X − Q_e·X_e)/(Q_R + Q_W), Q_e = Q − Q_W (solids mass balance, Metcalf & Eddy
 * 5th ed. 2014 [M for the chapter]). With Q_W = 0 and X_e = 0 it reduces to X·(Q + Q_R)/Q_R.
 * Unavailable when no flow leaves the bottom, Q_W > Q, or effluent solids exceed the feed.
 */
export function requiredRasConc_gL(inp: ClarifierBalanceInputs): Figure<number> {
  const qw = inp.wasFlow_m3h ?? 0;
  const xe = inp.effluentTss_gL ?? 0;
  const { influentFlow_m3h: q, rasFlow_m3h: qr, mlss_gL: x } = inp;
  if (!finiteNonNeg(q, qr, x, qw, xe)) return unavailable('flows and concentrations must be finite and ≥ 0');
  if (qw > q) return unavailable('waste flow exceeds influent flow: effluent flow would be negative');
  const under = qr + qw;
  if (under <= 0) return unavailable('no return or waste flow: the underflow concentration is undefined');
  const qe = q - qw;
  const solids = (q + qr) * x - qe * xe;
  if (solids < 0) return unavailable('effluent solids exceed the solids fed to the clarifier');
  return good(solids / under);
}

/**
 * Required underflow concentration neglecting waste flow and effluent solids,
 * X_R = X·(Q + Q_R)/Q_R (design §3 item 1; same textbook balance). Unavailable for Q_R ≤ 0.
 */
export function requiredRasConcSimple_gL(influentFlow_m3h: number, rasFlow_m3h: number, mlss_gL: number): Figure<number> {
  return requiredRasConc_gL({ influentFlow_m3h, rasFlow_m3h, mlss_gL });
}

/** Recycle ratio R = Q_R/Q [-] (design §3 item 1). Unavailable when Q ≤ 0. */
export function recycleRatio(influentFlow_m3h: number, rasFlow_m3h: number): Figure<number> {
  if (!finiteNonNeg(influentFlow_m3h, rasFlow_m3h)) return unavailable('flows must be finite and ≥ 0');
  if (influentFlow_m3h <= 0) return unavailable('no influent flow: recycle ratio undefined');
  return good(rasFlow_m3h / influentFlow_m3h);
}

/**
 * Residual of the steady-state clarifier balance [kg/h]: in − out =
 * (Q + Q_R)·X − (Q_R + Q_W)·X_R − Q_e·X_e. Zero at steady state; its sign says whether the
 * clarifier is accumulating (positive) or losing (negative) solids (design §3 item 7).
 */
export function clarifierBalanceResidual_kgh(inp: ClarifierBalanceInputs & { rasConc_gL: number }): Figure<number> {
  const qw = inp.wasFlow_m3h ?? 0;
  const xe = inp.effluentTss_gL ?? 0;
  const { influentFlow_m3h: q, rasFlow_m3h: qr, mlss_gL: x, rasConc_gL: xr } = inp;
  if (!finiteNonNeg(q, qr, x, qw, xe, xr)) return unavailable('flows and concentrations must be finite and ≥ 0');
  if (qw > q) return unavailable('waste flow exceeds influent flow: effluent flow would be negative');
  return good((q + qr) * x - (qr + qw) * xr - (q - qw) * xe);
}
