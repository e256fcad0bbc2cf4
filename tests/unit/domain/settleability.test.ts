import { describe, expect, it } from 'vitest';
import { DomainValidationError } from '../../../shared/domain/errors.js';
import { settleabilityIndex, settleabilityIssues } from '../../../shared/domain/settleability.js';

function thrown(fn: () => unknown): DomainValidationError {
  try {
    fn();
  } catch (e) {
    if (e instanceof DomainValidationError) return e;
    throw e;
  }
  throw new Error('expected a DomainValidationError');
}

describe('settleability tests', () => {
  it('SVI = settled volume / MLSS (Standard Methods 2710 D): 240 mL/L at 3.0 g/L → 80 mL/g', () => {
    expect(settleabilityIndex({ settledVolume_mLL: 240, mlss_gL: 3 }).value).toEqual({ svi_mLg: 80, kind: 'SVI' });
  });

  it('250 mL/L rule: above it an undiluted test must be diluted and repeated (Standard Methods 2710 D; Jenkins et al. 1993)', () => {
    expect(settleabilityIndex({ settledVolume_mLL: 250, mlss_gL: 2.5 }).value!.svi_mLg).toBe(100);
    const e = thrown(() => settleabilityIndex({ settledVolume_mLL: 251, mlss_gL: 2.5 }));
    expect(e.field).toBe('settledVolume_mLL');
    expect(e.message).toContain('dilute and repeat');
  });

  it('DSVI = diluted settled volume × dilution factor / undiluted MLSS (Jenkins et al. 1993): 200 mL/L at 1:2, 4 g/L → 100 mL/g', () => {
    expect(settleabilityIndex({ settledVolume_mLL: 200, mlss_gL: 4, dilutionFactor: 2 }).value).toEqual({ svi_mLg: 100, kind: 'DSVI' });
    expect(settleabilityIndex({ settledVolume_mLL: 200, mlss_gL: 4, dilutionFactor: 1, kind: 'DSVI' }).value!.svi_mLg).toBe(50);
    const over = thrown(() => settleabilityIndex({ settledVolume_mLL: 300, mlss_gL: 4, dilutionFactor: 2 }));
    expect(over.message).toContain('dilute and repeat');
    // our chosen lower bound for a diluted test: 150 mL/L ([M] Jenkins et al. 1993 band)
    const under = thrown(() => settleabilityIndex({ settledVolume_mLL: 140, mlss_gL: 4, dilutionFactor: 4 }));
    expect(under.field).toBe('settledVolume_mLL');
    expect(under.message).toMatch(/over-diluted/);
    expect(settleabilityIndex({ settledVolume_mLL: 150, mlss_gL: 4, dilutionFactor: 4 }).value!.svi_mLg).toBe(150);
    expect(thrown(() => settleabilityIndex({ settledVolume_mLL: 200, mlss_gL: 4, dilutionFactor: 2, kind: 'SVI' })).field).toBe('dilutionFactor');
  });

  it('SSVI3.5 is its own kind (White 1975), estimated away from 3.5 g/L, no dilution', () => {
    expect(settleabilityIndex({ settledVolume_mLL: 280, mlss_gL: 3.5, kind: 'SSVI' })).toMatchObject({ value: { svi_mLg: 80, kind: 'SSVI' }, quality: 'good' });
    expect(settleabilityIndex({ settledVolume_mLL: 200, mlss_gL: 2.5, kind: 'SSVI' }).quality).toBe('estimated');
    expect(thrown(() => settleabilityIndex({ settledVolume_mLL: 200, mlss_gL: 3.5, kind: 'SSVI', dilutionFactor: 2 })).field).toBe('dilutionFactor');
  });

  it('range problems are reported per field', () => {
    expect(settleabilityIssues({ settledVolume_mLL: 0, mlss_gL: 3 }).map((i) => i.field)).toEqual(['settledVolume_mLL']);
    expect(settleabilityIssues({ settledVolume_mLL: 100, mlss_gL: 0 }).map((i) => i.field)).toEqual(['mlss_gL']);
    expect(settleabilityIssues({ settledVolume_mLL: 100, mlss_gL: 3, dilutionFactor: 0.5 }).map((i) => i.field)).toEqual(['dilutionFactor']);
  });
});
