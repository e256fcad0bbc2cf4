import { execFileSync } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import pg from 'pg';
import { asPostgres, findPgBinDir } from '../../server/db/local-postgres.ts';
import { freePort } from './net.ts';

export interface StreamingReplica {
  port: number;
  /** The standby's data folder. */
  pgData: string;
  /** `url` (a URL of the primary cluster) with the replica's port: same roles, same passwords, same databases. */
  urlOf(url: string): string;
  stop(): void;
}

/**
 * A hot standby of a private cluster (the tests' of tests/setup/global-db.ts, or a benchmark's),
 * as an operator would make one:
 * `pg_basebackup -R -X stream` from the primary (its `-R` writes `standby.signal` and
 * `primary_conninfo`), then the copy started on a port of its own as the postgres user
 * (PostgreSQL manual, "Log-Shipping Standby Servers" and pg_basebackup). The primary needs no
 * change: initdb's defaults already have `wal_level = replica`, `max_wal_senders = 10` and
 * `host replication all 127.0.0.1/32` in pg_hba.conf, and the cluster's owner has REPLICATION.
 */
export async function startStreamingReplica(adminUrl: string, parentDir: string): Promise<StreamingReplica> {
  const bin = findPgBinDir();
  if (!bin) throw new Error('PostgreSQL binaries not found');
  // `parentDir`: the primary's data folder (testDataDir() in tests), which the postgres user can already reach.
  const dir = path.join(parentDir, `replica-${randomBytes(4).toString('hex')}`);
  const pgData = path.join(dir, 'pg');
  const sock = path.join(dir, 'sock');
  fs.mkdirSync(sock, { recursive: true, mode: 0o700 });
  if (process.getuid?.() === 0) {
    const uid = Number(execFileSync('id', ['-u', 'postgres'], { encoding: 'utf8' }).trim());
    const gid = Number(execFileSync('id', ['-g', 'postgres'], { encoding: 'utf8' }).trim());
    fs.chownSync(dir, uid, gid);
    fs.chownSync(sock, uid, gid);
  }
  asPostgres(path.join(bin, 'pg_basebackup'), ['-d', adminUrl, '-D', pgData, '-R', '-X', 'stream', '-c', 'fast']);
  const port = await freePort();
  asPostgres(path.join(bin, 'pg_ctl'), ['-D', pgData, '-l', path.join(dir, 'server.log'), '-w', '-t', '60', '-o', `-c listen_addresses=127.0.0.1 -p ${port} -k ${sock}`, 'start']);
  const urlOf = (url: string) => {
    const u = new URL(url);
    u.port = String(port);
    return u.toString();
  };
  // pg_ctl -w returns once the standby accepts connections (it is consistent); check it is one.
  const c = new pg.Client({ connectionString: urlOf(adminUrl) });
  await c.connect();
  try {
    const r = await c.query<{ standby: boolean }>('SELECT pg_is_in_recovery() AS standby');
    if (!r.rows[0]!.standby) throw new Error('the copy is not in recovery: not a standby');
  } finally {
    await c.end();
  }
  let stopped = false;
  return {
    port,
    pgData,
    urlOf,
    stop() {
      if (stopped) return;
      stopped = true;
      try {
        asPostgres(path.join(bin, 'pg_ctl'), ['-D', pgData, '-m', 'immediate', '-w', 'stop']);
      } finally {
        fs.rmSync(dir, { recursive: true, force: true });
      }
    },
  };
}
