import { execFileSync, spawnSync } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import { aptGet } from './apt.ts';
import fs from 'node:fs';
import net from 'node:net';
import path from 'node:path';

/**
 * A private PostgreSQL cluster from Debian's `postgresql` package, owned by the `postgres`
 * user, listening on 127.0.0.1 on a port of ours with its socket inside the data folder.
 * Never the system cluster: everything lives under `<dataDir>/pg`.
 */
export interface LocalPostgres {
  /** The cluster's owner (postgres): migrations and grants only. */
  url: string;
  /** The API's role (flocstream_api) and ingest's (flocstream_ingest), with generated passwords. */
  apiUrl: string;
  ingestUrl: string;
  roles: { api: string; ingest: string };
  port: number;
  /** True when this process started the server (and so stops it). */
  startedHere: boolean;
  stop(): void;
}

export class LocalPostgresError extends Error {}

const PG_USER = 'postgres';
const DB_NAME = 'flocstream';
/** Login roles of the API and ingest; their privileges are granted after migrating (migrate.ts grantRuntimeRoles). */
export const RUNTIME_ROLES = { api: 'flocstream_api', ingest: 'flocstream_ingest' } as const;

/** A generated password kept in `<dataDir>/<name>` (mode 600), created on first use. */
function secretFile(dataDir: string, name: string): string {
  const file = path.join(dataDir, name);
  if (!fs.existsSync(file)) fs.writeFileSync(file, randomBytes(18).toString('base64url'), { mode: 0o600, flag: 'wx' });
  fs.chmodSync(file, 0o600);
  return fs.readFileSync(file, 'utf8').trim();
}

function isRoot(): boolean {
  return typeof process.getuid === 'function' && process.getuid() === 0;
}

/** Newest `/usr/lib/postgresql/<major>/bin` that has initdb, or null. */
export function findPgBinDir(): string | null {
  const root = '/usr/lib/postgresql';
  if (!fs.existsSync(root)) return null;
  const majors = fs
    .readdirSync(root)
    .filter((d) => /^\d+$/.test(d) && fs.existsSync(path.join(root, d, 'bin', 'initdb')))
    .sort((a, b) => Number(b) - Number(a));
  return majors[0] ? path.join(root, majors[0], 'bin') : null;
}

function ensureBinaries(log: (m: string) => void): string {
  const found = findPgBinDir();
  if (found) return found;
  const cmd = 'apt-get update && apt-get install -y postgresql';
  if (!isRoot()) {
    throw new LocalPostgresError(`PostgreSQL server binaries not found; install them with: sudo ${cmd}`);
  }
  log(`PostgreSQL not found; installing Debian's package: ${cmd}`);
  // Passing the caller's environment through to apt-get is not reading configuration.
  // eslint-disable-next-line no-restricted-syntax
  const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
  for (const args of [['update'], ['install', '-y', '--no-install-recommends', 'postgresql']]) {
    const r = aptGet(args, env);
    if (r.status !== 0) throw new LocalPostgresError(`apt-get ${args.join(' ')} failed (exit ${r.status})`);
  }
  const after = findPgBinDir();
  if (!after) throw new LocalPostgresError('postgresql installed but no initdb under /usr/lib/postgresql/*/bin');
  return after;
}

/** Run a PostgreSQL binary as the postgres user (initdb and postgres refuse root); also the tests' streaming replica (tests/helpers/replica.ts). */
export function asPostgres(bin: string, args: string[], opts: { input?: string } = {}): string {
  const [cmd, argv] = isRoot() ? ['runuser', ['-u', PG_USER, '--', bin, ...args]] : [bin, args];
  const r = spawnSync(cmd, argv, { encoding: 'utf8', input: opts.input });
  if (r.status !== 0) {
    throw new LocalPostgresError(`${path.basename(bin)} failed: ${(r.stderr || r.stdout || '').trim().split('\n').slice(-3).join(' | ')}`);
  }
  return r.stdout;
}

/** The postgres user must be able to enter every parent folder of the data folder. */
function ensureTraversable(dir: string, log: (m: string) => void): void {
  if (!isRoot()) return;
  let d = path.dirname(dir);
  const parents: string[] = [];
  while (d !== path.dirname(d)) {
    parents.push(d);
    d = path.dirname(d);
  }
  for (const p of parents.reverse()) {
    const mode = fs.statSync(p).mode;
    if ((mode & 0o001) === 0) {
      log(`granting others search (x) permission on ${p} so the postgres user can reach its data folder`);
      fs.chmodSync(p, mode | 0o001);
    }
  }
}

export function portInUse(port: number, host = '127.0.0.1'): Promise<boolean> {
  return new Promise((resolve) => {
    const s = net.connect({ port, host });
    s.once('connect', () => {
      s.destroy();
      resolve(true);
    });
    s.once('error', () => resolve(false));
  });
}

function pgUid(): { uid: number; gid: number } {
  const uid = Number(execFileSync('id', ['-u', PG_USER], { encoding: 'utf8' }).trim());
  const gid = Number(execFileSync('id', ['-g', PG_USER], { encoding: 'utf8' }).trim());
  return { uid, gid };
}

function running(bin: string, pgData: string): boolean {
  const [cmd, argv] = isRoot() ? ['runuser', ['-u', PG_USER, '--', path.join(bin, 'pg_ctl'), 'status', '-D', pgData]] : [path.join(bin, 'pg_ctl'), ['status', '-D', pgData]];
  return spawnSync(cmd, argv, { encoding: 'utf8' }).status === 0;
}

export interface StartOptions {
  dataDir: string;
  port: number;
  dbName?: string;
  log?: (msg: string) => void;
}

/**
 * Find or install the binaries, create the cluster on first use, start it (or reuse it when it
 * already runs from this data folder), create the database. Throws LocalPostgresError with a
 * one-line message when something is in the way (port taken, no binaries, not root).
 */
export async function startLocalPostgres(opts: StartOptions): Promise<LocalPostgres> {
  const log = opts.log ?? (() => {});
  const dbName = opts.dbName ?? DB_NAME;
  const bin = ensureBinaries(log);
  const dataDir = path.resolve(opts.dataDir);
  const pgData = path.join(dataDir, 'pg');
  const sockDir = path.join(dataDir, 'pgsock');
  const pwFile = path.join(dataDir, 'pg-password');
  fs.mkdirSync(dataDir, { recursive: true });
  ensureTraversable(pgData, log);
  const owner = isRoot() ? pgUid() : null;

  if (!fs.existsSync(path.join(pgData, 'PG_VERSION'))) {
    log(`creating PostgreSQL cluster in ${pgData}`);
    fs.rmSync(pgData, { recursive: true, force: true });
    fs.mkdirSync(pgData, { mode: 0o700 });
    const password = randomBytes(18).toString('base64url');
    fs.writeFileSync(pwFile, password, { mode: 0o600 });
    // The password file sits beside the cluster folder: initdb wants an empty folder.
    const tmpPw = path.join(dataDir, 'pg-initpw');
    fs.writeFileSync(tmpPw, password, { mode: 0o600 });
    if (owner) {
      fs.chownSync(pgData, owner.uid, owner.gid);
      fs.chownSync(tmpPw, owner.uid, owner.gid);
    }
    asPostgres(path.join(bin, 'initdb'), [
      '-D', pgData, '-U', PG_USER, `--pwfile=${tmpPw}`, '--auth-local=trust', '--auth-host=scram-sha-256', '-E', 'UTF8', '--locale=C.UTF-8',
    ]);
    fs.rmSync(tmpPw, { force: true });
  }
  fs.mkdirSync(sockDir, { recursive: true, mode: 0o700 });
  if (owner) fs.chownSync(sockDir, owner.uid, owner.gid);
  const password = fs.readFileSync(pwFile, 'utf8').trim();

  let startedHere = false;
  if (!running(bin, pgData)) {
    if (await portInUse(opts.port)) {
      throw new LocalPostgresError(`port ${opts.port} on 127.0.0.1 is already in use by another program; set FLOCSTREAM_PG_PORT to a free port`);
    }
    log(`starting PostgreSQL on 127.0.0.1:${opts.port}`);
    asPostgres(path.join(bin, 'pg_ctl'), [
      '-D', pgData, '-l', path.join(pgData, 'server.log'), '-w', '-t', '60',
      '-o', `-c listen_addresses=127.0.0.1 -p ${opts.port} -k ${sockDir}`, 'start',
    ]);
    startedHere = true;
  } else {
    log(`reusing the PostgreSQL server already running from ${pgData}`);
  }

  // Create the database through the socket (local trust for the postgres user).
  const psql = path.join(bin, 'psql');
  const exists = asPostgres(psql, ['-h', sockDir, '-p', String(opts.port), '-U', PG_USER, '-d', 'postgres', '-tAc', `SELECT 1 FROM pg_database WHERE datname = '${dbName.replace(/'/g, "''")}'`]).trim();
  if (exists !== '1') {
    asPostgres(psql, ['-h', sockDir, '-p', String(opts.port), '-U', PG_USER, '-d', 'postgres', '-c', `CREATE DATABASE "${dbName.replace(/"/g, '""')}"`]);
  }

  // The API's and ingest's login roles (cluster-wide, so created once per cluster) with their
  // passwords set from the data folder on every start; the SQL goes through stdin, not argv.
  const rolePw = { api: secretFile(dataDir, 'pg-api-password'), ingest: secretFile(dataDir, 'pg-ingest-password') };
  const roleSql = (Object.keys(RUNTIME_ROLES) as Array<keyof typeof RUNTIME_ROLES>)
    .map((k) => `DO $$ BEGIN IF NOT EXISTS (SELECT FROM pg_roles WHERE rolname = '${RUNTIME_ROLES[k]}') THEN CREATE ROLE ${RUNTIME_ROLES[k]} LOGIN; END IF; END $$;
ALTER ROLE ${RUNTIME_ROLES[k]} WITH LOGIN NOSUPERUSER NOCREATEDB NOCREATEROLE PASSWORD '${rolePw[k]}';`)
    .join('\n');
  asPostgres(psql, ['-h', sockDir, '-p', String(opts.port), '-U', PG_USER, '-d', 'postgres', '-v', 'ON_ERROR_STOP=1', '-q'], { input: roleSql });

  const at = `@127.0.0.1:${opts.port}/${encodeURIComponent(dbName)}`;
  const url = `postgres://${PG_USER}:${encodeURIComponent(password)}${at}`;
  let stopped = false;
  return {
    url,
    apiUrl: `postgres://${RUNTIME_ROLES.api}:${encodeURIComponent(rolePw.api)}${at}`,
    ingestUrl: `postgres://${RUNTIME_ROLES.ingest}:${encodeURIComponent(rolePw.ingest)}${at}`,
    roles: { ...RUNTIME_ROLES },
    port: opts.port,
    startedHere,
    stop() {
      if (stopped || !startedHere) return;
      stopped = true;
      // A Ctrl-C in the terminal reaches postgres too and it may already be shutting down.
      if (!running(bin, pgData)) return;
      asPostgres(path.join(bin, 'pg_ctl'), ['-D', pgData, '-m', 'fast', '-w', 'stop']);
    },
  };
}

/** psql binary and socket folder for a cluster, used by the ingest benchmark's `\copy` reference. */
export function localPsql(dataDir: string): { psql: string; sockDir: string } | null {
  const bin = findPgBinDir();
  return bin ? { psql: path.join(bin, 'psql'), sockDir: path.join(path.resolve(dataDir), 'pgsock') } : null;
}
