import type { AuthChange } from '../auth/credential-cache.ts';
import type { z } from 'zod';
import type { createUserRequest, updateUserRequest, UserOut } from '../../shared/contracts/auth.ts';
import { ConflictError, NotFoundError } from '../http/errors.ts';
import type { PublicUser, SessionRepository, UserRepository } from '../repositories/user.repository.ts';
import type { Actor, AuditLog } from './audit.service.ts';

type CreateUserRequest = z.infer<typeof createUserRequest>;
type UpdateUserRequest = z.infer<typeof updateUserRequest>;

function out(u: PublicUser): UserOut {
  return { ...u, createdAt: u.createdAt.toISOString() };
}

export interface UserServiceDeps {
  userRepo: Pick<UserRepository, 'list' | 'insert' | 'byId' | 'update' | 'remove' | 'countActiveAdmins'>;
  /** A password, role or disabled change ends the user's sessions (OWASP Session Management Cheat Sheet). */
  sessionRepo: Pick<SessionRepository, 'revokeAllForUser'>;
  audit: AuditLog;
  /** Password hashing (server/auth/passwords.ts in the product). */
  hashPassword: (password: string) => Promise<string>;
  /** Drops cached callers of a changed user at once, here and in other API processes (server/auth/credential-cache.ts). */
  credentialsChanged: (change: AuthChange) => Promise<void>;
}

/** User management (admins, signed-in sessions only): every write audited; the last active admin cannot be removed or demoted. */
export function createUserService({ userRepo, sessionRepo, audit, hashPassword, credentialsChanged }: UserServiceDeps) {
  return {
    async list(): Promise<UserOut[]> {
      return (await userRepo.list()).map(out);
    },
    async create(principal: Actor, body: CreateUserRequest): Promise<UserOut> {
      const row = await userRepo.insert({ email: body.email, name: body.name, role: body.role, passwordHash: await hashPassword(body.password) });
      if (!row) throw new ConflictError(`a user with e-mail ${body.email} already exists`);
      await audit.record(principal, 'user.create', `user:${row.id}`, { email: row.email, role: row.role });
      return out(row);
    },
    async update(principal: Actor, id: number, body: UpdateUserRequest): Promise<UserOut> {
      const before = await userRepo.byId(id);
      if (!before) throw new NotFoundError(`no user ${id}`);
      // Signed-in sessions end when what they were granted on changes: the password (a session
      // opened by whoever knew the old one), the role, or the account being disabled. Open streams
      // of the user close on the announcement below (server/http/sse.ts).
      const endsSessions = body.password !== undefined || (body.role !== undefined && body.role !== before.role) || (body.disabled === true && !before.disabled);
      const losesAdmin = before.role === 'admin' && !before.disabled && ((body.role && body.role !== 'admin') || body.disabled === true);
      if (losesAdmin && (await userRepo.countActiveAdmins()) <= 1) throw new ConflictError('this is the last active admin; make another admin first');
      const row = await userRepo.update(id, {
        ...(body.name !== undefined ? { name: body.name } : {}),
        ...(body.role !== undefined ? { role: body.role } : {}),
        ...(body.disabled !== undefined ? { disabled: body.disabled } : {}),
        ...(body.password !== undefined ? { passwordHash: await hashPassword(body.password) } : {}),
      });
      const ended = endsSessions ? await sessionRepo.revokeAllForUser(id) : 0;
      await credentialsChanged({ userId: id });
      await audit.record(principal, 'user.update', `user:${id}`, { fields: Object.keys(body), ...(endsSessions ? { sessionsEnded: ended } : {}) });
      return out(row!);
    },
    async remove(principal: Actor, id: number): Promise<{ ok: true }> {
      const before = await userRepo.byId(id);
      if (!before) throw new NotFoundError(`no user ${id}`);
      if (before.id === principal.userId) throw new ConflictError('you cannot delete yourself');
      if (before.role === 'admin' && !before.disabled && (await userRepo.countActiveAdmins()) <= 1) throw new ConflictError('this is the last active admin');
      await userRepo.remove(id);
      await credentialsChanged({ userId: id });
      await audit.record(principal, 'user.delete', `user:${id}`, { email: before.email });
      return { ok: true };
    },
  };
}
export type UserService = ReturnType<typeof createUserService>;
