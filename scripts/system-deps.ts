import fs from 'node:fs';
import { aptGet } from '../server/db/apt.ts';
import { findPgBinDir } from '../server/db/local-postgres.ts';

/** Debian packages the tests need, with how to tell each is there. */
const NEEDS = [
  { pkg: 'postgresql', present: () => findPgBinDir() !== null },
  { pkg: 'chromium', present: () => fs.existsSync(chromiumPath()) },
];

export function chromiumPath(): string {
  // The real binary avoids a harmless warning the /usr/bin/chromium wrapper prints.
  return fs.existsSync('/usr/lib/chromium/chromium') ? '/usr/lib/chromium/chromium' : '/usr/bin/chromium';
}

/** Installs the missing Debian packages with apt-get when root; otherwise says the exact command. */
export function ensureSystemDeps(say: (m: string) => void): void {
  const missing = NEEDS.filter((n) => !n.present()).map((n) => n.pkg);
  if (!missing.length) return;
  const cmd = `apt-get update && apt-get install -y --no-install-recommends ${missing.join(' ')}`;
  if (process.getuid?.() !== 0) throw new Error(`missing system packages; install them with: sudo ${cmd}`);
  say(`installing Debian packages: ${missing.join(', ')}`);
  const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
  for (const args of [['update'], ['install', '-y', '--no-install-recommends', ...missing]]) {
    const r = aptGet(args, env);
    if (r.status !== 0) throw new Error(`apt-get ${args.join(' ')} failed (exit ${r.status})`);
  }
}
