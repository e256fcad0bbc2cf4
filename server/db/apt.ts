import { spawnSync } from 'node:child_process';

/**
 * Runs apt-get, waiting while another apt or dpkg process holds its lock (a second Flocstream
 * start, the test runner or unattended upgrades may be installing at the same moment): apt
 * exits 100 with "Could not get lock" then, and we retry for up to five minutes.
 */
export function aptGet(args: string[], env: NodeJS.ProcessEnv): { status: number | null } {
  const deadline = Date.now() + 5 * 60_000;
  for (;;) {
    const r = spawnSync('apt-get', ['-o', 'DPkg::Lock::Timeout=120', ...args], { stdio: ['ignore', 'inherit', 'pipe'], env, encoding: 'utf8' });
    if (r.stderr) process.stderr.write(r.stderr);
    const locked = r.status === 100 && /Could not get lock|Unable to lock/.test(r.stderr ?? '');
    if (!locked || Date.now() > deadline) return { status: r.status };
    process.stderr.write('apt is busy with another install; waiting…\n');
    spawnSync('sleep', ['5']);
  }
}
