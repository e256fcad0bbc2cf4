import type { Request } from 'express';
import type { z } from 'zod';
import type { createUserRequest, updateUserRequest, UserOut } from '../../shared/contracts/auth.ts';
import type { AppContext } from '../app-context.ts';
import { credentialChanged } from '../auth/credential-cache.ts';
import { hashPassword } from '../auth/passwords.ts';
import { ConflictError, NotFoundError } from '../http/errors.ts';
import { userRepository, type PublicUser } from '../repositories/user.repository.ts';
import { audit } from './audit.service.ts';

function out(u: PublicUser): UserOut {
  return { ...u, createdAt: u.createdAt.toISOString() };
}

export function userService(ctx: AppContext) {
  const repo = userRepository(ctx.db.db);
  return {
    async list(): Promise<UserOut[]> {
      return (await repo.list()).map(out);
    },
    async create(req: Request, body: z.infer<typeof createUserRequest>): Promise<UserOut> {
      const row = await repo.insert({ email: body.email, name: body.name, role: body.role, passwordHash: await hashPassword(body.password) });
      if (!row) throw new ConflictError(`a user with e-mail ${body.email} already exists`);
      await audit(ctx, req, 'user.create', `user:${row.id}`, { email: row.email, role: row.role });
      return out(row);
    },
    async update(req: Request, id: number, body: z.infer<typeof updateUserRequest>): Promise<UserOut> {
      const before = await repo.byId(id);
      if (!before) throw new NotFoundError(`no user ${id}`);
      const losesAdmin = before.role === 'admin' && !before.disabled && ((body.role && body.role !== 'admin') || body.disabled === true);
      if (losesAdmin && (await repo.countActiveAdmins()) <= 1) throw new ConflictError('this is the last active admin; make another admin first');
      const row = await repo.update(id, {
        ...(body.name !== undefined ? { name: body.name } : {}),
        ...(body.role !== undefined ? { role: body.role } : {}),
        ...(body.disabled !== undefined ? { disabled: body.disabled } : {}),
        ...(body.password !== undefined ? { passwordHash: await hashPassword(body.password) } : {}),
      });
      await credentialChanged(ctx, { userId: id });
      await audit(ctx, req, 'user.update', `user:${id}`, { fields: Object.keys(body) });
      return out(row!);
    },
    async remove(req: Request, id: number): Promise<{ ok: true }> {
      const before = await repo.byId(id);
      if (!before) throw new NotFoundError(`no user ${id}`);
      if (before.id === req.principal?.userId) throw new ConflictError('you cannot delete yourself');
      if (before.role === 'admin' && !before.disabled && (await repo.countActiveAdmins()) <= 1) throw new ConflictError('this is the last active admin');
      await repo.remove(id);
      await credentialChanged(ctx, { userId: id });
      await audit(ctx, req, 'user.delete', `user:${id}`, { email: before.email });
      return { ok: true };
    },
  };
}
