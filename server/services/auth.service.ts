import type { Me } from '../../shared/contracts/auth.ts';
import type { Clock } from '../app-context.ts';
import type { AuthChange } from '../auth/credential-cache.ts';
import { LoginThrottle, type Reservation } from '../auth/login-throttle.ts';
import type { Principal } from '../auth/principal.ts';
import { TooManyRequestsError, UnauthorizedError } from '../http/errors.ts';
import type { SessionRepository, UserRepository } from '../repositories/user.repository.ts';
import type { Actor, AuditLog } from './audit.service.ts';

export interface AuthServiceDeps {
  userRepo: Pick<UserRepository, 'byEmail' | 'byId'>;
  sessionRepo: Pick<SessionRepository, 'insert' | 'revoke'>;
  audit: AuditLog;
  clock: Clock;
  /** server/auth/passwords.ts in the product: verify against a stored hash, and a hash to verify against when there is no user (same work either way). */
  passwords: { verify: (hash: string, password: string) => Promise<boolean>; dummyHash: () => Promise<string> };
  /** The session id of a new session (server/auth/session.ts `newSessionId`). */
  newSessionId: () => string;
  /** Signs the session cookie for a user id and session id (server/auth/session.ts). */
  signSession: (userId: number, sessionId: string) => Promise<string>;
  /** How long a session lasts [s]. */
  sessionTtl_s: number;
  /** Drops cached callers of an ended session at once, here and in other API processes (server/auth/credential-cache.ts). */
  credentialsChanged: (change: AuthChange) => Promise<void>;
}

/** Where a sign-in comes from: the client address (throttle, audit) and its User-Agent (kept on the session row). */
export interface LoginOrigin {
  ip: string | null;
  userAgent: string | null;
}

/** Sign-in, sign-out and "who am I". The session cookie itself is the route's (HTTP) part. */
export function createAuthService({ userRepo, sessionRepo, audit, clock, passwords, newSessionId, signSession, sessionTtl_s, credentialsChanged }: AuthServiceDeps) {
  // Five failures per account, fifty per client address, in 15 minutes.
  const byEmail = new LoginThrottle(5);
  const byIp = new LoginThrottle(50);
  return {
    /**
     * Checks the password (throttled per account and per address); the session cookie and the
     * caller on success. The attempt is reserved before the slow hash, so parallel guesses count
     * while they are checked (server/auth/login-throttle.ts).
     */
    async login(email: string, password: string, from: LoginOrigin): Promise<{ session: string; me: Me }> {
      const { ip } = from;
      const now = clock();
      const e = byEmail.reserve([email.toLowerCase()], now);
      if (!('fail' in e)) throw tooMany(e.wait_s);
      const i = byIp.reserve([ip ?? 'unknown'], now);
      if (!('fail' in i)) {
        e.release();
        throw tooMany(i.wait_s);
      }
      let user;
      let ok: boolean;
      try {
        user = await userRepo.byEmail(email);
        ok = await passwords.verify(user?.passwordHash ?? (await passwords.dummyHash()), password);
      } catch (err) {
        release(e, i);
        throw err;
      }
      if (!user || !ok || user.disabled) {
        e.fail();
        i.fail();
        await audit.record({ ip }, 'auth.login_failed', email);
        throw new UnauthorizedError('wrong e-mail or password');
      }
      e.succeed();
      i.release();
      const sessionId = newSessionId();
      await sessionRepo.insert({ id: sessionId, userId: user.id, expiresAt: new Date(now + sessionTtl_s * 1000), userAgent: from.userAgent?.slice(0, 400) ?? null, ip });
      const session = await signSession(user.id, sessionId);
      await audit.record({ userId: user.id, email: user.email, role: user.role, tokenId: null, plantIds: null, ip }, 'auth.login', `user:${user.id}`);
      return { session, me: { id: user.id, email: user.email, name: user.name, role: user.role, viaToken: false } };
    },
    /** Ends the caller's session server-side, so a copy of its cookie stops working too. */
    async logout(principal: (Actor & { sessionId?: string | null }) | null): Promise<{ ok: true }> {
      if (principal?.sessionId) {
        await sessionRepo.revoke(principal.sessionId);
        await credentialsChanged({ sessionId: principal.sessionId });
      }
      if (principal) await audit.record(principal, 'auth.logout', `user:${principal.userId}`);
      return { ok: true };
    },
    /** Forgets an account's failed sign-ins (the recovery command's unlock, announced through NOTIFY). */
    async unlock(userId: number): Promise<void> {
      const u = await userRepo.byId(userId);
      if (u) byEmail.clear([u.email.toLowerCase()]);
    },
    async me(p: Principal): Promise<Me> {
      const u = await userRepo.byId(p.userId);
      return { id: p.userId, email: p.email, name: u?.name ?? p.email, role: p.role, viaToken: p.tokenId !== null };
    },
  };
}
export type AuthService = ReturnType<typeof createAuthService>;

function tooMany(wait_s: number): TooManyRequestsError {
  const when = wait_s < 60 ? `${wait_s} s` : `${Math.ceil(wait_s / 60)} min`;
  return new TooManyRequestsError(`too many sign-in attempts for this account or address; try again in ${when}`, wait_s);
}

function release(...rs: Reservation[]): void {
  for (const r of rs) r.release();
}
