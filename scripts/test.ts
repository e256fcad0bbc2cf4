/**
 * `npm test`: runs the vitest projects, first installing and building only what the selected
 * projects need: unit nothing; integration Debian's PostgreSQL server (a throwaway private
 * cluster) and Debian's mosquitto (the external MQTT 5 broker of the scale-out test); e2e PostgreSQL,
 * Debian's Chromium and the built monitor. Arguments go to vitest
 * (`npm test -- --project unit`); with no project named, every project runs and all is prepared.
 */
import { spawnSync } from 'node:child_process';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { buildMonitorIfNeeded } from './build-if-needed.ts';
import { ensureSystemDeps } from './system-deps.ts';
import { PROJECT_NEEDS, selectedProjects } from './test-projects.ts';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const say = (m: string) => console.log(`[test] ${m}`);

const args = process.argv.slice(2);
const projects = selectedProjects(args);
try {
  ensureSystemDeps(say, [...new Set(projects.flatMap((p) => PROJECT_NEEDS[p]!.packages))]);
  if (projects.some((p) => PROJECT_NEEDS[p]!.monitor)) buildMonitorIfNeeded(root, say);
} catch (err) {
  console.error(`[test] ${(err as Error).message}`);
  process.exit(1);
}
const r = spawnSync(process.execPath, [path.join(root, 'node_modules/vitest/vitest.mjs'), 'run', ...args], { cwd: root, stdio: 'inherit' });
process.exit(r.status ?? 1);
