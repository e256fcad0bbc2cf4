import { spawn, spawnSync } from 'node:child_process';
import path from 'node:path';
import { findPgBinDir } from '../../server/db/local-postgres.ts';

/**
 * A launcher (`npm start`, `npm run dev`) run as a person runs it: in its own process group like
 * a terminal's foreground job, ready when its banner's last line appears, stopped with SIGINT to
 * the whole group (Ctrl-C).
 */
export interface LauncherRun {
  /** Everything printed so far (stdout and stderr). */
  text(): string;
  /** Resolves once `re` matches the output (checked as the output arrives), rejects on exit or after `timeout_ms`. */
  waitForOutput(re: RegExp, timeout_ms?: number): Promise<RegExpMatchArray>;
  /** Ctrl-C; resolves with the whole output once npm exited. */
  stop(): Promise<string>;
}

export const root = path.resolve(import.meta.dirname, '../..');
export const READY = /Press Ctrl-C to stop/;

/**
 * The environment a launcher test runs `npm start` / `npm run dev` with: its own data folder and
 * five consecutive ports from `base` (API, PostgreSQL, MQTT broker, simulator OPC UA, mail
 * catcher), never the system cluster (DATABASE_URL removed).
 */
export function launcherEnv(dataDir: string, base: number, extra: NodeJS.ProcessEnv = {}): NodeJS.ProcessEnv {
  const env: NodeJS.ProcessEnv = {
    ...process.env,
    FLOCSTREAM_DATA_DIR: dataDir,
    PORT: String(base),
    FLOCSTREAM_PG_PORT: String(base + 1),
    FLOCSTREAM_MQTT_PORT: String(base + 2),
    FLOCSTREAM_SIM_OPCUA_PORT: String(base + 3),
    FLOCSTREAM_MAIL_CATCHER_PORT: String(base + 5),
    ...extra,
  };
  delete env.DATABASE_URL;
  return env;
}

export async function runLauncher(args: string[], env: NodeJS.ProcessEnv, ready_ms = 90_000): Promise<LauncherRun> {
  const proc = spawn('npm', args, { cwd: root, env, detached: true, stdio: ['ignore', 'pipe', 'pipe'] });
  const out: string[] = [];
  let exited = false;
  const waiters = new Set<() => void>();
  // npm re-raises the SIGINT after its script ends, so the launcher's own last line is the check.
  const exit = new Promise<string>((r) =>
    proc.once('exit', () => {
      exited = true;
      for (const w of waiters) w();
      r(out.join(''));
    }),
  );
  const on = (b: Buffer) => {
    out.push(b.toString());
    for (const w of waiters) w();
  };
  proc.stdout!.on('data', on);
  proc.stderr!.on('data', on);
  const run: LauncherRun = {
    text: () => out.join(''),
    waitForOutput(re, timeout_ms = 60_000) {
      return new Promise((resolve, reject) => {
        const check = () => {
          const m = re.exec(out.join(''));
          if (m || exited) {
            clearTimeout(t);
            waiters.delete(check);
            if (m) resolve(m);
            else reject(new Error(`exited before ${re}:\n${out.join('')}`));
          }
        };
        const t = setTimeout(() => {
          waiters.delete(check);
          reject(new Error(`no ${re} within ${timeout_ms / 1000} s:\n${out.join('')}`));
        }, timeout_ms);
        waiters.add(check);
        check();
      });
    },
    async stop() {
      if (!exited) process.kill(-proc.pid!, 'SIGINT');
      return exit;
    },
  };
  await run.waitForOutput(READY, ready_ms);
  return run;
}

/** Whether the private cluster of `dataDir` runs (pg_ctl status as the postgres user). */
export function pgRunning(dataDir: string): boolean {
  const bin = findPgBinDir()!;
  return spawnSync('runuser', ['-u', 'postgres', '--', path.join(bin, 'pg_ctl'), 'status', '-D', path.join(dataDir, 'pg')]).status === 0;
}

/** Processes whose command line contains any of `needles` (what a stop must have left behind: nothing). */
export function processesMatching(needles: string[]): string[] {
  const ps = spawnSync('ps', ['-eo', 'pid,args'], { encoding: 'utf8' }).stdout.split('\n');
  return ps.filter((l) => needles.some((n) => l.includes(n)) && !l.includes(' ps -eo '));
}
