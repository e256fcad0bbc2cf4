/**
 * Effective dating of unit geometry: a unit's versions each hold from their `effectiveFrom`
 * until the next one. The version valid at time t is the latest one starting at or before t;
 * before the first version the first one holds (history imported from before a plant was set
 * up is computed with its first geometry). Pure; the versions are sorted here, not trusted.
 */
export function versionAt<V extends { effectiveFrom: Date }>(versions: readonly V[], t: Date): V | undefined {
  let best: V | undefined;
  let first: V | undefined;
  for (const v of versions) {
    if (!first || v.effectiveFrom < first.effectiveFrom) first = v;
    if (v.effectiveFrom <= t && (!best || v.effectiveFrom > best.effectiveFrom)) best = v;
  }
  return best ?? first;
}
