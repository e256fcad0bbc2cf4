/**
 * Loads and validates scenario files. Names refer to simulators/scenarios/<name>.json; a path
 * ending in .json loads that file. Cross-checks that the faults and trips name tags and pumps
 * of the plant, because a typo there would otherwise silently do nothing.
 */
import { readFileSync, readdirSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { scenarioSchema, type Scenario } from './scenario.schema.js';
import type { DemoPlant } from '../plant/demo-plant.js';

export const SCENARIO_DIR = dirname(fileURLToPath(import.meta.url));

export class ScenarioError extends Error {
  constructor(
    message: string,
    readonly issues: string[] = [],
  ) {
    super(issues.length ? `${message}:\n  ${issues.join('\n  ')}` : message);
    this.name = 'ScenarioError';
  }
}

export function listScenarios(): string[] {
  return readdirSync(SCENARIO_DIR)
    .filter((f) => f.endsWith('.json'))
    .map((f) => f.slice(0, -5))
    .sort();
}

/** Validates a scenario object against the schema and the plant. */
export function parseScenario(raw: unknown, plant: DemoPlant, source = 'scenario'): Scenario {
  const r = scenarioSchema.safeParse(raw);
  if (!r.success) throw new ScenarioError(`${source} is not a valid scenario`, r.error.issues.map((i) => `${i.path.join('.') || '(root)'}: ${i.message}`));
  const s = r.data;
  const issues: string[] = [];
  const tagNames = new Set(plant.tags.map((t) => t.name));
  s.faults.forEach((f, i) => {
    if (!tagNames.has(f.tag)) issues.push(`faults.${i}.tag: no tag "${f.tag}" in ${plant.code}`);
    if ((f.kind === 'spike' || f.kind === 'skew' || f.kind === 'drift') && f.magnitude === undefined) issues.push(`faults.${i}.magnitude: required for ${f.kind}`);
  });
  const rasPumps = new Set(plant.trains.flatMap((t) => t.pumps.filter((p) => p.kind === 'ras').map((p) => p.code)));
  s.ras.trips.forEach((t, i) => {
    if (!rasPumps.has(t.pump)) issues.push(`ras.trips.${i}.pump: no RAS pump "${t.pump}" in ${plant.code}`);
  });
  if (issues.length) throw new ScenarioError(`${source} does not fit plant ${plant.code}`, issues);
  return s;
}

export function loadScenario(nameOrPath: string, plant: DemoPlant): Scenario {
  const file = nameOrPath.endsWith('.json') ? nameOrPath : join(SCENARIO_DIR, `${nameOrPath}.json`);
  if (!nameOrPath.endsWith('.json') && !listScenarios().includes(nameOrPath)) {
    throw new ScenarioError(`unknown scenario "${nameOrPath}" (known: ${listScenarios().join(', ')})`);
  }
  let raw: unknown;
  try {
    raw = JSON.parse(readFileSync(file, 'utf8'));
  } catch (e) {
    throw new ScenarioError(`cannot read ${file}: ${(e as Error).message}`);
  }
  return parseScenario(raw, plant, file);
}
