/**
 * `npm run admin -- <command>`: account recovery on the machine that holds the data folder,
 * working on its database directly (DATABASE_URL, or the private cluster in FLOCSTREAM_DATA_DIR,
 * started for the command when it is not running). It needs no sign-in, so a lock-out — five
 * wrong passwords for the last admin, from anyone who can reach the sign-in page — can never
 * lock the operator at the machine's own console out; whoever runs it can already read the data
 * folder, which holds the database password.
 *
 *   users                        list the accounts (e-mail, role, disabled)
 *   unlock <email>               clear the account's sign-in lock-out and re-enable it
 *   reset-password <email>       set a new random password (printed once), re-enable the
 *                                account, end its sessions and clear its lock-out
 *
 * A running API hears each change at once through `NOTIFY flocstream_auth`
 * (server/auth/credential-cache.ts): cached callers are dropped, the lock-out is forgotten.
 */
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { AUTH_CHANNEL, type AuthChange } from '../server/auth/credential-cache.ts';
import { hashPassword, randomPassword } from '../server/auth/passwords.ts';
import { loadConfig } from '../server/config.ts';
import { openDatabase } from '../server/db/client.ts';
import { startLocalPostgres } from '../server/db/local-postgres.ts';
import { sessionRepository, userRepository } from '../server/repositories/user.repository.ts';

const USAGE = `usage: npm run admin -- users | unlock <email> | reset-password <email>`;

export class AdminCommandError extends Error {}

/** Runs one command against `databaseUrl`; returns the lines to print. */
export async function runAdminCommand(args: string[], databaseUrl: string): Promise<string[]> {
  const [command, email, ...rest] = args;
  if (!command || rest.length > 0) throw new AdminCommandError(USAGE);
  const database = openDatabase(databaseUrl, { max: 2 });
  try {
    const users = userRepository(database.db);
    const sessions = sessionRepository(database.db);
    const announce = async (change: AuthChange) => {
      await database.pool.query('SELECT pg_notify($1, $2)', [AUTH_CHANNEL, JSON.stringify(change)]);
    };
    if (command === 'users') {
      if (email) throw new AdminCommandError(USAGE);
      const list = await users.list();
      return list.map((u) => `${u.email.padEnd(36)} ${u.role.padEnd(10)} ${u.disabled ? 'disabled' : 'active'}`);
    }
    if (command !== 'unlock' && command !== 'reset-password') throw new AdminCommandError(USAGE);
    if (!email) throw new AdminCommandError(USAGE);
    const user = await users.byEmail(email);
    if (!user) throw new AdminCommandError(`no user with e-mail ${email} (npm run admin -- users lists them)`);
    if (command === 'unlock') {
      if (user.disabled) await users.update(user.id, { disabled: false });
      await announce({ userId: user.id });
      await announce({ unlockUserId: user.id });
      return [`${user.email} unlocked${user.disabled ? ' and re-enabled' : ''}; sign in with its password`];
    }
    const password = randomPassword();
    await users.update(user.id, { passwordHash: await hashPassword(password), disabled: false });
    const ended = await sessions.revokeAllForUser(user.id);
    await announce({ userId: user.id });
    await announce({ unlockUserId: user.id });
    return [`new password for ${user.email} (shown once; change it after signing in):`, `  ${password}`, `${ended} open session(s) ended`];
  } finally {
    await database.close();
  }
}

if (process.argv[1] && fileURLToPath(import.meta.url) === path.resolve(process.argv[1])) {
  const cfg = loadConfig();
  let stop = () => {};
  try {
    let url = cfg.databaseUrl;
    if (!url) {
      const pg = await startLocalPostgres({ dataDir: cfg.dataDir, port: cfg.pgPort, log: (m) => process.stderr.write(`${m}\n`) });
      url = pg.url;
      stop = () => pg.stop();
    }
    const lines = await runAdminCommand(process.argv.slice(2), url);
    process.stdout.write(lines.map((l) => `${l}\n`).join(''));
    stop();
  } catch (err) {
    process.stderr.write(`${err instanceof AdminCommandError ? err.message : `admin command failed: ${(err as Error).message}`}\n`);
    stop();
    process.exit(err instanceof AdminCommandError ? 2 : 1);
  }
}
