import type { Me } from '../../shared/contracts/auth.ts';
import type { Clock } from '../app-context.ts';
import { LoginThrottle } from '../auth/login-throttle.ts';
import type { Principal } from '../auth/principal.ts';
import { TooManyRequestsError, UnauthorizedError } from '../http/errors.ts';
import type { UserRepository } from '../repositories/user.repository.ts';
import type { Actor, AuditLog } from './audit.service.ts';

export interface AuthServiceDeps {
  userRepo: Pick<UserRepository, 'byEmail' | 'byId'>;
  audit: AuditLog;
  clock: Clock;
  /** server/auth/passwords.ts in the product: verify against a stored hash, and a hash to verify against when there is no user (same work either way). */
  passwords: { verify: (hash: string, password: string) => Promise<boolean>; dummyHash: () => Promise<string> };
  /** Signs the session token for a user id (server/auth/session.ts). */
  signSession: (userId: number) => Promise<string>;
}

/** Sign-in, sign-out and "who am I". The session cookie itself is the route's (HTTP) part. */
export function createAuthService({ userRepo, audit, clock, passwords, signSession }: AuthServiceDeps) {
  // Five failures per account, fifty per client address, in 15 minutes.
  const byEmail = new LoginThrottle(5);
  const byIp = new LoginThrottle(50);
  return {
    /** Checks the password (throttled per account and per address); the session token and the caller on success. */
    async login(email: string, password: string, ip: string | null): Promise<{ session: string; me: Me }> {
      const keysE = [email];
      const keysI = [ip ?? 'unknown'];
      const now = clock();
      const wait = Math.max(byEmail.retryAfter_s(keysE, now), byIp.retryAfter_s(keysI, now));
      if (wait > 0) throw new TooManyRequestsError(`too many failed sign-ins; try again in ${Math.ceil(wait / 60)} min`, wait);
      const user = await userRepo.byEmail(email);
      const ok = await passwords.verify(user?.passwordHash ?? (await passwords.dummyHash()), password);
      if (!user || !ok || user.disabled) {
        byEmail.fail(keysE, now);
        byIp.fail(keysI, now);
        await audit.record({ ip }, 'auth.login_failed', email);
        throw new UnauthorizedError('wrong e-mail or password');
      }
      byEmail.succeed(keysE);
      const session = await signSession(user.id);
      await audit.record({ userId: user.id, email: user.email, role: user.role, tokenId: null, plantIds: null, ip }, 'auth.login', `user:${user.id}`);
      return { session, me: { id: user.id, email: user.email, name: user.name, role: user.role, viaToken: false } };
    },
    async logout(principal: Actor | null): Promise<{ ok: true }> {
      if (principal) await audit.record(principal, 'auth.logout', `user:${principal.userId}`);
      return { ok: true };
    },
    async me(p: Principal): Promise<Me> {
      const u = await userRepo.byId(p.userId);
      return { id: p.userId, email: p.email, name: u?.name ?? p.email, role: p.role, viaToken: p.tokenId !== null };
    },
  };
}
export type AuthService = ReturnType<typeof createAuthService>;
