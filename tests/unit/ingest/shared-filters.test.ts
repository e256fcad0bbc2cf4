import { describe, expect, it } from 'vitest';
import { sharedFilters } from '../../../ingest/ingest-service.ts';

describe('shared subscription filters', () => {
  it('prefixes each topic filter with $share/<ShareName>/ (MQTT 5.0 §4.8.2)', () => {
    // §4.8.2: "$share/{ShareName}/{filter}"; the filter keeps its own wildcards.
    expect(sharedFilters('flocstream', ['kb/#', 'spBv1.0/+/DDATA/#'])).toEqual(['$share/flocstream/kb/#', '$share/flocstream/spBv1.0/+/DDATA/#']);
  });
});
