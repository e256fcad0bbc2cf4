import type { Role } from '../../shared/contracts/roles.ts';
import { ROLES } from '../../shared/contracts/roles.ts';
import type { AppContext } from '../app-context.ts';
import { hashPassword, randomPassword } from '../auth/passwords.ts';
import { userRepository } from '../repositories/user.repository.ts';
import { audit } from './audit.service.ts';

export interface Credential {
  email: string;
  role: Role;
  password: string;
}

/**
 * With no user at all, creates the first admin from FLOCSTREAM_ADMIN_EMAIL / _PASSWORD, or with a
 * random password that is returned (to be printed once) and never stored in clear.
 * With `demo`, also one user per role (demo-<role>@flocstream.invalid, random passwords).
 * Returns the credentials created now; nothing is returned for users that already existed.
 */
export async function bootstrapUsers(ctx: AppContext, demo: boolean): Promise<Credential[]> {
  const repo = userRepository(ctx.db.db);
  const created: Credential[] = [];
  if ((await repo.count()) === 0) {
    const email = ctx.config.adminEmail ?? 'admin@flocstream.invalid';
    const password = ctx.config.adminPassword ?? randomPassword();
    const row = await repo.insert({ email, name: 'Administrator', role: 'admin', passwordHash: await hashPassword(password) });
    if (row) {
      await audit(ctx, null, 'user.bootstrap_admin', `user:${row.id}`, { email });
      created.push({ email, role: 'admin', password: ctx.config.adminPassword ? '(from FLOCSTREAM_ADMIN_PASSWORD)' : password });
    }
  }
  if (demo) {
    for (const role of ROLES) {
      const email = `demo-${role}@flocstream.invalid`;
      if (await repo.byEmail(email)) continue;
      const password = randomPassword();
      const row = await repo.insert({ email, name: `Demo ${role}`, role, passwordHash: await hashPassword(password) });
      if (row) {
        await audit(ctx, null, 'user.demo_create', `user:${row.id}`, { email, role });
        created.push({ email, role, password });
      }
    }
  }
  return created;
}
