/**
 * Sample quality as stored in `samples.quality` (smallint) and carried on the wire.
 *
 * The low two bits hold the overall grade, modelled on the OPC UA status-code severity
 * (OPC 10000-4 §7.39: Good / Uncertain / Bad); the higher bits say why a sample was
 * downgraded, so a trend can show the reason and the balance engine can explain itself.
 */
export const QUALITY_GRADE = { good: 0, uncertain: 1, bad: 2 } as const;
export type QualityGrade = keyof typeof QUALITY_GRADE;

export const QUALITY_FLAG = {
  sourceStatus: 1 << 2, // the source (OPC UA status code, MQTT payload "q") said uncertain/bad
  outOfRange: 1 << 3, // outside the tag's engineering range
  flatLine: 1 << 4, // unchanged for longer than the flat-line window
  spike: 1 << 5, // step larger than the spike limit
  clockSkew: 1 << 6, // source timestamp far from the receive time
} as const;
export type QualityFlag = keyof typeof QUALITY_FLAG;

export function encodeQuality(grade: QualityGrade, flags: readonly QualityFlag[] = []): number {
  let code: number = QUALITY_GRADE[grade];
  for (const f of flags) code |= QUALITY_FLAG[f];
  return code;
}

export function qualityGrade(code: number): QualityGrade {
  const g = code & 0b11;
  return g === 0 ? 'good' : g === 1 ? 'uncertain' : 'bad';
}

export function qualityFlags(code: number): QualityFlag[] {
  return (Object.keys(QUALITY_FLAG) as QualityFlag[]).filter((f) => (code & QUALITY_FLAG[f]) !== 0);
}

/** Worst of two codes: the higher grade wins, flags are united. */
export function worstQuality(a: number, b: number): number {
  const grade = Math.max(a & 0b11, b & 0b11);
  return ((a | b) & ~0b11) | grade;
}
