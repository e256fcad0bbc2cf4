import { z } from 'zod';

/** The four roles of DESIGN §1, ordered by what they may do: each includes the ones before it. */
export const ROLES = ['analyst', 'operator', 'integrator', 'admin'] as const;
export const roleSchema = z.enum(ROLES);
export type Role = z.infer<typeof roleSchema>;

export function roleRank(role: Role): number {
  return ROLES.indexOf(role);
}

/** True when `have` is at least `need`. */
export function roleAtLeast(have: Role, need: Role): boolean {
  return roleRank(have) >= roleRank(need);
}
