import fs from 'node:fs';
import { aptGet } from '../server/db/apt.ts';
import { findPgBinDir } from '../server/db/local-postgres.ts';

/** Debian packages the tests may need, with how to tell each is there. */
const PRESENT = {
  postgresql: () => findPgBinDir() !== null,
  chromium: () => fs.existsSync(chromiumPath()),
  // The external MQTT 5 broker of the scale-out test and `bench:ingest -- --broker mosquitto`.
  mosquitto: () => fs.existsSync(MOSQUITTO_PATH),
};

/** Debian's mosquitto broker binary. */
export const MOSQUITTO_PATH = '/usr/sbin/mosquitto';
export type SystemPackage = keyof typeof PRESENT;

export function chromiumPath(): string {
  // The real binary avoids a harmless warning the /usr/bin/chromium wrapper prints.
  return fs.existsSync('/usr/lib/chromium/chromium') ? '/usr/lib/chromium/chromium' : '/usr/bin/chromium';
}

/** Installs those of `packages` that are missing with apt-get when root; otherwise says the exact command. */
export function ensureSystemDeps(say: (m: string) => void, packages: readonly SystemPackage[]): void {
  const missing = packages.filter((p) => !PRESENT[p]());
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
