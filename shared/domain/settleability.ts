/**
 * Settleability tests: SVI (Standard Methods 2710 D), diluted SVI (DSVI; Jenkins, Richard &
 * Daigger, Manual on the Causes and Control of Activated Sludge Bulking and Foaming, 2nd ed.
 * 1993) and stirred SVI at 3.5 g/L (SSVI3.5; White 1975). Lab entries are validated and
 * flagged, never silently corrected (design §3 item 8).
 */
import { DomainValidationError } from './errors.js';
import { estimated, good, type Figure } from './quality.js';

export type SettleabilityKind = 'SVI' | 'DSVI' | 'SSVI';

/** Largest settled volume accepted without (further) dilution [mL/L] (Standard Methods 2710 D; Jenkins et al. 1993). */
export const MAX_SETTLED_VOLUME_mLL = 250;
/**
 * Smallest settled volume accepted for a diluted test [mL/L]. Our choice: 150 mL/L, the lower
 * end of the 150–250 mL/L band recalled from Jenkins et al. (1993) [M]; below it the sample was
 * diluted more than needed and the reading loses resolution, so the test should be repeated
 * with less dilution. Undiluted tests have no lower limit beyond a positive volume.
 */
export const MIN_DILUTED_SETTLED_VOLUME_mLL = 150;
/**
 * Plausible range of an SVI-family result [mL/g]: outside it the test or its MLSS was entered
 * wrongly (e.g. MLSS in mg/L). 20 mL/g is below the densest granular sludge and 1000 mL/g above
 * the worst bulking — our bounds around the usual range of the trade [CP].
 */
export const SVI_RANGE_mLg = Object.freeze({ min: 20, max: 1000 });
/** Plausible MLSS of a test or a calculator input [g/L] (0.1–20: our bounds around any activated sludge [CP]). */
export const MLSS_RANGE_gL = Object.freeze({ min: 0.1, max: 20 });

/** SSVI3.5 is defined at 3.5 g/L; tests outside 3.0–4.0 g/L (our tolerance choice) are flagged estimated. */
export const SSVI_REFERENCE_MLSS_gL = 3.5;
export const SSVI_MLSS_TOLERANCE_gL = 0.5;

export interface SettleabilityInputs {
  /** Settled volume after 30 min in a 1 L cylinder [mL/L] — of the diluted sample for a DSVI. */
  settledVolume_mLL: number;
  /** MLSS of the undiluted sample [g/L]. */
  mlss_gL: number;
  /** Dilution factor (total volume / sludge volume) ≥ 1; 1 or omitted means undiluted. */
  dilutionFactor?: number;
  /** Test kind; inferred when omitted: DSVI with dilution > 1, otherwise SVI. */
  kind?: SettleabilityKind;
}

export interface SettleabilityIssue {
  field: 'settledVolume_mLL' | 'mlss_gL' | 'dilutionFactor' | 'kind';
  message: string;
  /** True for plain range checks (which a zod schema already enforces field by field), false for the test rules. */
  range: boolean;
}

/** The kind a test is recorded as: the given one, else DSVI when diluted, else SVI. */
export function settleabilityKind(inp: Pick<SettleabilityInputs, 'dilutionFactor' | 'kind'>): SettleabilityKind {
  return inp.kind ?? ((inp.dilutionFactor ?? 1) > 1 ? 'DSVI' : 'SVI');
}

/**
 * Validation rules of the settleability tests (Standard Methods 2710 D; Jenkins et al. 1993;
 * White 1975), returned instead of thrown so the zod contract and the domain share them:
 * an undiluted SVI above 250 mL/L must be diluted and repeated; a DSVI's diluted settled
 * volume must be ≤ 250 mL/L and, when diluted (factor > 1), ≥ 150 mL/L; an SVI cannot carry
 * a dilution; an SSVI is a stirred test without dilution. Volumes must be in (0, 1000] mL/L,
 * MLSS within 0.1–20 g/L and the resulting index within 20–1000 mL/g (plausibility [CP]).
 */
export function settleabilityIssues(inp: SettleabilityInputs): SettleabilityIssue[] {
  const issues: SettleabilityIssue[] = [];
  const v = inp.settledVolume_mLL;
  const f = inp.dilutionFactor ?? 1;
  const kind = settleabilityKind(inp);
  if (!Number.isFinite(v) || v <= 0 || v > 1000) issues.push({ field: 'settledVolume_mLL', message: 'settled volume must be > 0 and ≤ 1000 mL/L', range: true });
  if (!Number.isFinite(inp.mlss_gL) || inp.mlss_gL < MLSS_RANGE_gL.min || inp.mlss_gL > MLSS_RANGE_gL.max) {
    issues.push({ field: 'mlss_gL', message: `MLSS must lie within ${MLSS_RANGE_gL.min}–${MLSS_RANGE_gL.max} g/L`, range: true });
  }
  if (!Number.isFinite(f) || f < 1) issues.push({ field: 'dilutionFactor', message: 'dilution factor must be ≥ 1', range: true });
  if (issues.length) return issues;
  if (kind === 'SVI') {
    if (f > 1) issues.push({ field: 'dilutionFactor', message: 'a diluted test is a DSVI: set kind to DSVI or leave it out', range: false });
    else if (v > MAX_SETTLED_VOLUME_mLL) {
      issues.push({ field: 'settledVolume_mLL', message: `settled volume ${v} mL/L is above ${MAX_SETTLED_VOLUME_mLL} mL/L: dilute and repeat (record the result as a DSVI)` , range: false });
    }
  } else if (kind === 'DSVI') {
    if (v > MAX_SETTLED_VOLUME_mLL) {
      issues.push({ field: 'settledVolume_mLL', message: `diluted settled volume ${v} mL/L is above ${MAX_SETTLED_VOLUME_mLL} mL/L: dilute and repeat with a higher dilution` , range: false });
    } else if (f > 1 && v < MIN_DILUTED_SETTLED_VOLUME_mLL) {
      issues.push({ field: 'settledVolume_mLL', message: `diluted settled volume ${v} mL/L is below ${MIN_DILUTED_SETTLED_VOLUME_mLL} mL/L: over-diluted, repeat with less dilution` , range: false });
    }
  } else if (f > 1) {
    issues.push({ field: 'dilutionFactor', message: 'an SSVI3.5 is a stirred test at 3.5 g/L and takes no dilution factor', range: false });
  }
  if (issues.length === 0) {
    const index = (v * (kind === 'DSVI' ? f : 1)) / inp.mlss_gL;
    if (index < SVI_RANGE_mLg.min || index > SVI_RANGE_mLg.max) {
      issues.push({
        field: 'settledVolume_mLL',
        message: `${kind} = ${index.toPrecision(3)} mL/g lies outside the plausible ${SVI_RANGE_mLg.min}–${SVI_RANGE_mLg.max} mL/g: check the settled volume, the dilution and the MLSS (g/L, not mg/L)`,
        range: false,
      });
    }
  }
  return issues;
}

/**
 * Settleability index [mL/g]: SVI = settled volume/MLSS (Standard Methods 2710 D);
 * DSVI = diluted settled volume × dilution factor / MLSS of the undiluted sample (Jenkins et
 * al. 1993); SSVI3.5 = stirred settled volume/MLSS, recorded as its own kind (White 1975) and
 * 'estimated' when the test MLSS is more than 0.5 g/L from 3.5 g/L. Throws
 * DomainValidationError { field, message } for the rules of {@link settleabilityIssues}
 * (e.g. "dilute and repeat").
 */
export function settleabilityIndex(inp: SettleabilityInputs): Figure<{ svi_mLg: number; kind: SettleabilityKind }> {
  const issues = settleabilityIssues(inp);
  if (issues.length) throw new DomainValidationError(issues[0]!.field, issues[0]!.message);
  const kind = settleabilityKind(inp);
  const f = inp.dilutionFactor ?? 1;
  const svi = (inp.settledVolume_mLL * (kind === 'DSVI' ? f : 1)) / inp.mlss_gL;
  const value = { svi_mLg: svi, kind };
  if (kind === 'SSVI' && Math.abs(inp.mlss_gL - SSVI_REFERENCE_MLSS_gL) > SSVI_MLSS_TOLERANCE_gL) {
    return estimated(value, `SSVI3.5 is defined at 3.5 g/L; this test was run at ${inp.mlss_gL} g/L`);
  }
  return good(value);
}
