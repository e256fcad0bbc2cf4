import type { Role } from '../../shared/contracts/roles.ts';
import { ROLES } from '../../shared/contracts/roles.ts';
import { services, type AppContext } from '../app-context.ts';
import type { UserRepository } from '../repositories/user.repository.ts';
import type { AuditLog } from './audit.service.ts';

export interface Credential {
  email: string;
  role: Role;
  password: string;
}

export interface BootstrapServiceDeps {
  userRepo: Pick<UserRepository, 'count' | 'insert' | 'byEmail'>;
  audit: AuditLog;
  passwords: { hash: (password: string) => Promise<string>; random: () => string };
  /** FLOCSTREAM_ADMIN_EMAIL / _PASSWORD (server/config.ts). */
  admin: { email: string | undefined; password: string | undefined };
}

export function createBootstrapService({ userRepo: repo, audit, passwords, admin }: BootstrapServiceDeps) {
  return {
    /**
     * With no user at all, creates the first admin from FLOCSTREAM_ADMIN_EMAIL / _PASSWORD, or with a
     * random password that is returned (to be printed once) and never stored in clear.
     * With `demo`, also one user per role (demo-<role>@flocstream.invalid, random passwords).
     * Returns the credentials created now; nothing is returned for users that already existed.
     */
    async users(demo: boolean): Promise<Credential[]> {
      const created: Credential[] = [];
      if ((await repo.count()) === 0) {
        const email = admin.email ?? 'admin@flocstream.invalid';
        const password = admin.password ?? passwords.random();
        const row = await repo.insert({ email, name: 'Administrator', role: 'admin', passwordHash: await passwords.hash(password) });
        if (row) {
          await audit.record(null, 'user.bootstrap_admin', `user:${row.id}`, { email });
          created.push({ email, role: 'admin', password: admin.password ? '(from FLOCSTREAM_ADMIN_PASSWORD)' : password });
        }
      }
      if (demo) {
        for (const role of ROLES) {
          const email = `demo-${role}@flocstream.invalid`;
          if (await repo.byEmail(email)) continue;
          const password = passwords.random();
          const row = await repo.insert({ email, name: `Demo ${role}`, role, passwordHash: await passwords.hash(password) });
          if (row) {
            await audit.record(null, 'user.demo_create', `user:${row.id}`, { email, role });
            created.push({ email, role, password });
          }
        }
      }
      return created;
    },
  };
}

/** `services(ctx).bootstrap.users(demo)` for server/main.ts. */
export function bootstrapUsers(ctx: AppContext, demo: boolean): Promise<Credential[]> {
  return services(ctx).bootstrap.users(demo);
}
