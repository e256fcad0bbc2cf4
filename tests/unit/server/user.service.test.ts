import { describe, expect, it } from 'vitest';
import type { Role } from '../../../shared/contracts/roles.ts';
import { ConflictError, NotFoundError } from '../../../server/http/errors.ts';
import type { PublicUser, UserRow } from '../../../server/repositories/user.repository.ts';
import { createUserService } from '../../../server/services/user.service.ts';
import { admin, fakeAudit } from './service-fakes.ts';

/** The users table in memory (e-mail unique, lower-cased as the repository does). */
function fakeUserRepo(seed: Array<{ id: number; email: string; role: Role; disabled?: boolean }>) {
  const rows = new Map<number, UserRow>();
  for (const u of seed) rows.set(u.id, { id: u.id, email: u.email, name: u.email, role: u.role, disabled: u.disabled ?? false, passwordHash: 'h', createdAt: new Date(0), updatedAt: new Date(0) });
  const pub = ({ id, email, name, role, disabled, createdAt }: UserRow): PublicUser => ({ id, email, name, role, disabled, createdAt });
  return {
    rows,
    async list() {
      return [...rows.values()].map(pub);
    },
    async byId(id: number) {
      return rows.get(id);
    },
    async countActiveAdmins() {
      return [...rows.values()].filter((u) => u.role === 'admin' && !u.disabled).length;
    },
    async insert(u: { email: string; name: string; role: Role; passwordHash: string }) {
      const email = u.email.toLowerCase();
      if ([...rows.values()].some((r) => r.email === email)) return undefined;
      const row: UserRow = { id: rows.size + 100, ...u, email, disabled: false, createdAt: new Date(0), updatedAt: new Date(0) };
      rows.set(row.id, row);
      return pub(row);
    },
    async update(id: number, patch: Partial<Pick<UserRow, 'name' | 'role' | 'passwordHash' | 'disabled'>>) {
      const r = rows.get(id);
      if (!r) return undefined;
      Object.assign(r, patch);
      return pub(r);
    },
    async remove(id: number) {
      return rows.delete(id);
    },
  };
}
const hashPassword = async (pw: string) => `hashed:${pw.length}`;
/** Records which users' cached credentials the service dropped. */
function fakeCredentials() {
  const changed: unknown[] = [];
  return { changed, credentialsChanged: async (c: unknown) => void changed.push(c) };
}

/** Records whose sessions the service ended. */
function fakeSessions() {
  const ended: number[] = [];
  return { ended, sessionRepo: { revokeAllForUser: async (userId: number) => (ended.push(userId), 1) } };
}

describe('user service with a fake repository (no HTTP, no database)', () => {
  it('create stores the hash (never the password), answers no hash, audits; a duplicate e-mail is 409', async () => {
    const userRepo = fakeUserRepo([{ id: 1, email: admin.email, role: 'admin' }]);
    const audit = fakeAudit();
    const svc = createUserService({ userRepo, audit, hashPassword, ...fakeCredentials(), ...fakeSessions() });
    const out = await svc.create(admin, { email: 'shift@kestrel.invalid', name: 'Shift', role: 'operator', password: 'a-long-password-1' });
    expect(out).not.toHaveProperty('passwordHash');
    expect(userRepo.rows.get(out.id)?.passwordHash).toBe('hashed:17');
    expect(audit.entries).toEqual([{ actor: admin, action: 'user.create', target: `user:${out.id}`, details: { email: 'shift@kestrel.invalid', role: 'operator' } }]);
    await expect(svc.create(admin, { email: 'SHIFT@kestrel.invalid', name: 'x', role: 'analyst', password: 'a-long-password-2' })).rejects.toBeInstanceOf(ConflictError);
  });

  it('the last active admin can be neither demoted, disabled nor deleted; with a second admin it can', async () => {
    const userRepo = fakeUserRepo([
      { id: 1, email: admin.email, role: 'admin' },
      { id: 2, email: 'boss@kestrel.invalid', role: 'admin', disabled: true },
    ]);
    const creds = fakeCredentials();
    const sessions = fakeSessions();
    const svc = createUserService({ userRepo, audit: fakeAudit(), hashPassword, credentialsChanged: creds.credentialsChanged, sessionRepo: sessions.sessionRepo });
    const other = { ...admin, userId: 2 };
    await expect(svc.update(other, 1, { role: 'operator' })).rejects.toBeInstanceOf(ConflictError);
    await expect(svc.update(other, 1, { disabled: true })).rejects.toBeInstanceOf(ConflictError);
    await expect(svc.remove(other, 1)).rejects.toBeInstanceOf(ConflictError);
    await svc.update(admin, 2, { disabled: false });
    expect((await svc.update(other, 1, { role: 'operator' })).role).toBe('operator');
    // A role change or a re-enable must reach cached callers at once; refused changes drop nothing.
    expect(creds.changed).toEqual([{ userId: 2 }, { userId: 1 }]);
    // The demotion ended user 1's sessions; re-enabling user 2 ended none.
    expect(sessions.ended).toEqual([1]);
  });

  it('a password change, a role change and disabling end the sessions; a new name or the same role does not', async () => {
    const userRepo = fakeUserRepo([
      { id: 1, email: admin.email, role: 'admin' },
      { id: 2, email: 'op@kestrel.invalid', role: 'operator' },
    ]);
    const sessions = fakeSessions();
    const svc = createUserService({ userRepo, audit: fakeAudit(), hashPassword, ...fakeCredentials(), sessionRepo: sessions.sessionRepo });
    await svc.update(admin, 2, { name: 'Night shift' });
    await svc.update(admin, 2, { role: 'operator' });
    expect(sessions.ended).toEqual([]);
    await svc.update(admin, 2, { password: 'another-long-password' });
    await svc.update(admin, 2, { role: 'analyst' });
    await svc.update(admin, 2, { disabled: true });
    expect(sessions.ended).toEqual([2, 2, 2]);
  });

  it('nobody deletes themselves; an unknown user is 404', async () => {
    const userRepo = fakeUserRepo([
      { id: 1, email: admin.email, role: 'admin' },
      { id: 2, email: 'boss@kestrel.invalid', role: 'admin' },
    ]);
    const svc = createUserService({ userRepo, audit: fakeAudit(), hashPassword, ...fakeCredentials(), ...fakeSessions() });
    await expect(svc.remove(admin, admin.userId)).rejects.toThrow('you cannot delete yourself');
    await expect(svc.remove(admin, 77)).rejects.toBeInstanceOf(NotFoundError);
    expect(await svc.remove(admin, 2)).toEqual({ ok: true });
  });
});
