import { QUALITY_FLAG, QUALITY_GRADE, type QualityGrade } from '../../shared/contracts/sample-quality.ts';
import type { Sample, TagConfig } from './types.ts';

/** Settings of the per-sample checks that are not per tag. */
export interface QualityOptions {
  /** A value unchanged for this many expected periods is flagged flat-lined (minimum 5 min). */
  flatLinePeriods: number;
  /** A source timestamp this far in the future of the receive time is flagged clock skew [ms]. */
  futureSkewMs: number;
  /** With a deadband, a sample is still stored when this many expected periods passed since the last stored one. */
  deadbandMaxPeriods: number;
}

export const DEFAULT_QUALITY_OPTIONS: QualityOptions = { flatLinePeriods: 360, futureSkewMs: 5 * 60_000, deadbandMaxPeriods: 10 };

/** Why `process` produced no sample. */
export type Rejection = { reason: string };

const GRADE_MASK = 0b11;

function withGrade(code: number, grade: QualityGrade): number {
  const g = Math.max(code & GRADE_MASK, QUALITY_GRADE[grade]);
  return (code & ~GRADE_MASK) | g;
}

/**
 * Per-tag pipeline stage: scale (engineering = raw × gain + offset), grade and deadband.
 * Pure state machine — no I/O — so it is unit-tested with plain numbers.
 *
 * Grading follows the OPC UA status-code severities (OPC 10000-4 §7.39) as encoded in
 * shared/contracts/sample-quality.ts:
 * - the source's own quality (MQTT `q`, OPC UA StatusCode) is kept, with the sourceStatus flag;
 * - outside [rangeLow, rangeHigh] → Uncertain + outOfRange, in the spirit of OPC UA's
 *   Uncertain_EngineeringUnitsExceeded (OPC 10000-8 §5.6.2, EURange);
 * - an analog value unchanged for flatLinePeriods × expectedPeriod (at least 5 min) → Uncertain +
 *   flatLine; a state (pump running) or counter tag is never flagged, as it holds still by nature;
 * - source timestamp too far in the future → Uncertain + clockSkew.
 * Staleness (no sample at all) cannot be a property of a sample; it is reported by the status
 * file from `lastSeen` (see `isStale`).
 *
 * Deadband: a good sample within ±deadband of the last stored value is not stored, unless
 * deadbandMaxPeriods × expectedPeriod passed since the last stored one (so a flat signal still
 * shows it is alive) or its quality differs.
 */
export class TagProcessor {
  private lastStoredValue: number | null = null;
  private lastStoredTs = -Infinity;
  private lastStoredQuality = -1;
  private lastValue: number | null = null;
  private unchangedSince = 0;
  /** Receive time of the last sample, for staleness. */
  lastSeen = 0;

  constructor(
    public tag: TagConfig,
    private opts: QualityOptions = DEFAULT_QUALITY_OPTIONS,
  ) {}

  process(rawValue: number | null, ts: number, sourceGrade: QualityGrade, receivedAt: number): Sample | Rejection | null {
    const t = this.tag;
    this.lastSeen = receivedAt;
    if (!Number.isFinite(ts)) return { reason: 'timestamp is not a valid date' };
    let quality: number = QUALITY_GRADE[sourceGrade];
    if (sourceGrade !== 'good') quality |= QUALITY_FLAG.sourceStatus;
    let value: number | null = null;
    if (rawValue !== null) {
      value = rawValue * t.scaleGain + t.scaleOffset;
      if (!Number.isFinite(value)) return { reason: `scaled value is not finite (raw ${rawValue} × ${t.scaleGain} + ${t.scaleOffset})` };
      if ((t.rangeLow !== null && value < t.rangeLow) || (t.rangeHigh !== null && value > t.rangeHigh)) {
        quality = withGrade(quality | QUALITY_FLAG.outOfRange, 'uncertain');
      }
      if (t.kind !== 'analog') {
        this.unchangedSince = ts;
      } else if (this.lastValue !== null && value === this.lastValue) {
        const window = Math.max(300_000, this.opts.flatLinePeriods * t.expectedPeriod_s * 1000);
        if (ts - this.unchangedSince >= window) quality = withGrade(quality | QUALITY_FLAG.flatLine, 'uncertain');
      } else {
        this.unchangedSince = ts;
      }
      this.lastValue = value;
    } else if (sourceGrade !== 'bad') {
      return { reason: 'null value without bad quality' };
    }
    if (ts > receivedAt + this.opts.futureSkewMs) quality = withGrade(quality | QUALITY_FLAG.clockSkew, 'uncertain');

    if (
      t.deadband > 0 &&
      value !== null &&
      this.lastStoredValue !== null &&
      quality === this.lastStoredQuality &&
      Math.abs(value - this.lastStoredValue) < t.deadband &&
      ts >= this.lastStoredTs &&
      ts - this.lastStoredTs < this.opts.deadbandMaxPeriods * t.expectedPeriod_s * 1000
    ) {
      return null;
    }
    if (ts >= this.lastStoredTs) {
      this.lastStoredValue = value;
      this.lastStoredTs = ts;
      this.lastStoredQuality = quality;
    }
    return { tagId: t.id, ts, value, quality };
  }

  /** No sample for three expected periods. */
  isStale(now: number): boolean {
    return now - this.lastSeen > 3 * this.tag.expectedPeriod_s * 1000;
  }
}

export function isSample(x: Sample | Rejection | null): x is Sample {
  return x !== null && 'tagId' in x;
}
