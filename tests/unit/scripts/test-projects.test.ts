import { describe, expect, it } from 'vitest';
import { PROJECT_NEEDS, selectedProjects } from '../../../scripts/test-projects.ts';
import vitestConfig from '../../../vitest.config.ts';

describe('npm test prepares only what the selected projects need', () => {
  it('knows every vitest project, and no other', () => {
    const names = (vitestConfig.test?.projects ?? []).map((p) => (typeof p === 'object' && 'test' in p ? p.test?.name : undefined));
    expect(Object.keys(PROJECT_NEEDS).sort()).toEqual([...names].sort());
  });

  it('the unit project needs no database, no browser and no build', () => {
    expect(PROJECT_NEEDS.unit).toEqual({ packages: [], monitor: false });
  });

  it('selects by --project, by path, or else all', () => {
    expect(selectedProjects(['--project', 'unit'])).toEqual(['unit']);
    expect(selectedProjects(['--project=integration', '--project', 'unit'])).toEqual(['unit', 'integration']);
    expect(selectedProjects(['--project', 'e*'])).toEqual(['e2e']);
    expect(selectedProjects(['tests/unit/domain/srt.test.ts', './tests/unit/server'])).toEqual(['unit']);
    expect(selectedProjects(['tests/unit/x.test.ts', 'tests/e2e/y.test.ts'])).toEqual(['unit', 'e2e']);
    // A bare filter or an option's value may match any project's files: prepare everything.
    expect(selectedProjects(['alarms'])).toEqual(['unit', 'integration', 'e2e']);
    expect(selectedProjects(['-t', 'tests/unit/'])).toEqual(['unit', 'integration', 'e2e']);
    expect(selectedProjects([])).toEqual(['unit', 'integration', 'e2e']);
  });
});
