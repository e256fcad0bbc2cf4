import type { Role } from '../../shared/contracts/roles.ts';

/** Who is calling: a signed-in user, or a script with an API token (role capped by both). */
export interface Principal {
  userId: number;
  email: string;
  role: Role;
  tokenId: number | null;
  /** Plants this caller may read; null = all. */
  plantIds: number[] | null;
  /** The `sessions` row of a signed-in caller (absent for API tokens and callers built in code). */
  sessionId?: string | null;
}

declare module 'express-serve-static-core' {
  interface Request {
    principal?: Principal;
  }
}
