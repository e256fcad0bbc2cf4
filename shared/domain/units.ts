/**
 * Unit conversions at the edges. Inside Flocstream: flows m³/h, concentrations g/L (= kg/m³),
 * mass kg, lengths m, time h (sludge age reported in d). These are exact SI definitions
 * (BIPM, The International System of Units, 9th ed. 2019), no empirical content.
 */

export const HOURS_PER_DAY = 24;

/** m³/d → m³/h. */
export function m3d_to_m3h(flow_m3d: number): number {
  return flow_m3d / HOURS_PER_DAY;
}

/** m³/h → m³/d. */
export function m3h_to_m3d(flow_m3h: number): number {
  return flow_m3h * HOURS_PER_DAY;
}

/** m/d → m/h. */
export function md_to_mh(v_md: number): number {
  return v_md / HOURS_PER_DAY;
}

/** g/m³ (= mg/L) → g/L. */
export function gm3_to_gL(c_gm3: number): number {
  return c_gm3 / 1000;
}

/** g/L → g/m³ (= mg/L). */
export function gL_to_gm3(c_gL: number): number {
  return c_gL * 1000;
}

/** mg/L → g/L. */
export function mgL_to_gL(c_mgL: number): number {
  return c_mgL / 1000;
}

/** m³/g → L/g (settling parameters such as rh, rp, k). */
export function m3g_to_Lg(k_m3g: number): number {
  return k_m3g * 1000;
}

/** Sludge volume index mL/g → specific sludge volume m³/kg (1 mL/g = 1e-6 m³ / 1e-3 kg = 1e-3 m³/kg). */
export function sviMLg_to_m3kg(svi_mLg: number): number {
  return svi_mLg * 1e-3;
}

/** h → d. */
export function h_to_d(t_h: number): number {
  return t_h / HOURS_PER_DAY;
}

/** d → h. */
export function d_to_h(t_d: number): number {
  return t_d * HOURS_PER_DAY;
}

/** Epoch milliseconds → hours. */
export function ms_to_h(t_ms: number): number {
  return t_ms / 3_600_000;
}
