/**
 * `npm test`: installs the Debian packages the tests need (PostgreSQL server, Chromium) when
 * missing, builds the monitor for the browser tests, then runs every vitest project:
 * unit, integration (a throwaway private cluster) and e2e (Debian Chromium).
 */
import { spawnSync } from 'node:child_process';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { buildMonitorIfNeeded } from './build-if-needed.ts';
import { ensureSystemDeps } from './system-deps.ts';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const say = (m: string) => console.log(`[test] ${m}`);
try {
  ensureSystemDeps(say);
  buildMonitorIfNeeded(root, say);
} catch (err) {
  console.error(`[test] ${(err as Error).message}`);
  process.exit(1);
}
const args = process.argv.slice(2);
const r = spawnSync(process.execPath, [path.join(root, 'node_modules/vitest/vitest.mjs'), 'run', ...args], { cwd: root, stdio: 'inherit' });
process.exit(r.status ?? 1);
