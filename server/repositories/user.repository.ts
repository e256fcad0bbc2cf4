import { and, asc, count, eq, isNull, lt } from 'drizzle-orm';
import type { Role } from '../../shared/contracts/roles.ts';
import type { Db } from '../db/client.ts';
import { apiTokens, sessions, users } from '../db/schema/index.ts';

export type UserRow = typeof users.$inferSelect;
export type TokenRow = typeof apiTokens.$inferSelect;

const publicUser = { id: users.id, email: users.email, name: users.name, role: users.role, disabled: users.disabled, createdAt: users.createdAt };
export type PublicUser = Pick<UserRow, 'id' | 'email' | 'name' | 'role' | 'disabled' | 'createdAt'>;

export function userRepository(db: Db) {
  return {
    async count(): Promise<number> {
      const [r] = await db.select({ n: count() }).from(users);
      return r?.n ?? 0;
    },
    async countActiveAdmins(): Promise<number> {
      const [r] = await db.select({ n: count() }).from(users).where(and(eq(users.role, 'admin'), eq(users.disabled, false)));
      return r?.n ?? 0;
    },
    async byEmail(email: string): Promise<UserRow | undefined> {
      const [u] = await db.select().from(users).where(eq(users.email, email.toLowerCase()));
      return u;
    },
    async byId(id: number): Promise<UserRow | undefined> {
      const [u] = await db.select().from(users).where(eq(users.id, id));
      return u;
    },
    /** The oldest enabled user with this role (the launcher imports the demo's past as one). */
    async firstActive(role: Role): Promise<UserRow | undefined> {
      const [u] = await db.select().from(users).where(and(eq(users.role, role), eq(users.disabled, false))).orderBy(asc(users.id)).limit(1);
      return u;
    },
    list(): Promise<PublicUser[]> {
      return db.select(publicUser).from(users).orderBy(asc(users.id));
    },
    async insert(u: { email: string; name: string; role: Role; passwordHash: string }): Promise<PublicUser | undefined> {
      const [row] = await db
        .insert(users)
        .values({ ...u, email: u.email.toLowerCase() })
        .onConflictDoNothing()
        .returning(publicUser);
      return row;
    },
    async update(id: number, patch: Partial<{ name: string; role: Role; passwordHash: string; disabled: boolean }>): Promise<PublicUser | undefined> {
      const [row] = await db
        .update(users)
        .set({ ...patch, updatedAt: new Date() })
        .where(eq(users.id, id))
        .returning(publicUser);
      return row;
    },
    async remove(id: number): Promise<boolean> {
      const r = await db.delete(users).where(eq(users.id, id)).returning({ id: users.id });
      return r.length > 0;
    },
  };
}

const publicToken = {
  id: apiTokens.id,
  name: apiTokens.name,
  role: apiTokens.role,
  prefix: apiTokens.prefix,
  plantIds: apiTokens.plantIds,
  expiresAt: apiTokens.expiresAt,
  revokedAt: apiTokens.revokedAt,
  lastUsedAt: apiTokens.lastUsedAt,
  createdAt: apiTokens.createdAt,
};

export function tokenRepository(db: Db) {
  return {
    listForUser(userId: number) {
      return db.select(publicToken).from(apiTokens).where(eq(apiTokens.userId, userId)).orderBy(asc(apiTokens.id));
    },
    async insert(t: { userId: number; name: string; role: Role; tokenHash: string; prefix: string; plantIds: number[] | null; expiresAt: Date }) {
      const [row] = await db.insert(apiTokens).values(t).returning(publicToken);
      return row!;
    },
    async revoke(userId: number, id: number): Promise<boolean> {
      const r = await db
        .update(apiTokens)
        .set({ revokedAt: new Date() })
        .where(and(eq(apiTokens.id, id), eq(apiTokens.userId, userId), isNull(apiTokens.revokedAt)))
        .returning({ id: apiTokens.id });
      return r.length > 0;
    },
    async byHashWithUser(tokenHash: string) {
      const [row] = await db
        .select({ token: apiTokens, user: users })
        .from(apiTokens)
        .innerJoin(users, eq(users.id, apiTokens.userId))
        .where(eq(apiTokens.tokenHash, tokenHash));
      return row;
    },
    async touch(id: number): Promise<void> {
      await db.update(apiTokens).set({ lastUsedAt: new Date() }).where(eq(apiTokens.id, id));
    },
  };
}
/** Server-side sessions (server/db/schema/auth.ts `sessions`). */
export function sessionRepository(db: Db) {
  return {
    /** Stores a new session; the user's sessions that ended over a week ago go (the table stays small; the audit log keeps the sign-ins). */
    async insert(s: { id: string; userId: number; expiresAt: Date; userAgent: string | null; ip: string | null }): Promise<void> {
      const weekAgo = new Date(Date.now() - 7 * 86_400_000);
      await db.delete(sessions).where(and(eq(sessions.userId, s.userId), lt(sessions.expiresAt, weekAgo)));
      await db.insert(sessions).values(s);
    },
    /** The session and its user, whatever their state (the caller judges revoked, expired, disabled). */
    async byIdWithUser(id: string) {
      const [row] = await db.select({ session: sessions, user: users }).from(sessions).innerJoin(users, eq(users.id, sessions.userId)).where(eq(sessions.id, id));
      return row;
    },
    /** Ends one session; false when it was unknown or already ended. */
    async revoke(id: string): Promise<boolean> {
      const r = await db
        .update(sessions)
        .set({ revokedAt: new Date() })
        .where(and(eq(sessions.id, id), isNull(sessions.revokedAt)))
        .returning({ id: sessions.id });
      return r.length > 0;
    },
    /** Ends every open session of a user; the number ended. */
    async revokeAllForUser(userId: number): Promise<number> {
      const r = await db
        .update(sessions)
        .set({ revokedAt: new Date() })
        .where(and(eq(sessions.userId, userId), isNull(sessions.revokedAt)))
        .returning({ id: sessions.id });
      return r.length;
    },
    async touch(id: string): Promise<void> {
      await db.update(sessions).set({ lastSeenAt: new Date() }).where(eq(sessions.id, id));
    },
  };
}
export type UserRepository = ReturnType<typeof userRepository>;
export type SessionRepository = ReturnType<typeof sessionRepository>;
export type TokenRepository = ReturnType<typeof tokenRepository>;
