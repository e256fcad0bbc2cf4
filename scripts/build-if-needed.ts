import { spawnSync } from 'node:child_process';
import fs from 'node:fs';
import path from 'node:path';

function newestMtime(p: string): number {
  const st = fs.statSync(p);
  if (!st.isDirectory()) return st.mtimeMs;
  let m = st.mtimeMs;
  for (const e of fs.readdirSync(p)) m = Math.max(m, newestMtime(path.join(p, e)));
  return m;
}

/** Builds the monitor with Vite when dist/ is missing or older than its sources. */
export function buildMonitorIfNeeded(root: string, say: (m: string) => void): void {
  const out = path.join(root, 'dist', 'index.html');
  const sources = ['src', 'shared', 'index.html', 'vite.config.ts'].map((p) => path.join(root, p)).filter((p) => fs.existsSync(p));
  const srcTime = Math.max(...sources.map(newestMtime));
  if (fs.existsSync(out) && fs.statSync(out).mtimeMs >= srcTime) return;
  say('building the monitor (vite build)…');
  const r = spawnSync(process.execPath, [path.join(root, 'node_modules/vite/bin/vite.js'), 'build', '--logLevel', 'warn'], { cwd: root, stdio: 'inherit' });
  if (r.status !== 0) throw new Error('vite build failed');
}
