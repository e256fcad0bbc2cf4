/** Display formatting: fixed significant figures for process values, compact ages, UTC times. */
export function formatValue(v: number | null | undefined, digits = 3): string {
  if (v === null || v === undefined || !Number.isFinite(v)) return '—';
  const a = Math.abs(v);
  if (a === 0) return '0';
  if (a >= 10 ** digits) return Math.round(v).toLocaleString('en-US').replace(/,/g, '\u2009');
  const decimals = Math.max(0, digits - 1 - Math.floor(Math.log10(a)));
  return v.toFixed(Math.min(decimals, 4));
}

export function formatAge(age_s: number | null | undefined): string {
  if (age_s === null || age_s === undefined || !Number.isFinite(age_s)) return '—';
  const s = Math.max(0, age_s);
  if (s < 90) return `${Math.round(s)} s`;
  if (s < 5400) return `${Math.round(s / 60)} min`;
  if (s < 172_800) return `${(s / 3600).toFixed(1)} h`;
  return `${Math.round(s / 86_400)} d`;
}

export function formatUtc(iso: string | null | undefined): string {
  return iso ? `${iso.slice(0, 19).replace('T', ' ')}Z` : '—';
}

/** Units as people write them. */
export function prettyUnit(u: string): string {
  return u.replace('m3/h', 'm³/h').replace('m3', 'm³').replace('m2', 'm²').replace('kgm2h', 'kg/(m²·h)');
}
