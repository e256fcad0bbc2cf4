import { bigserial, boolean, index, integer, jsonb, pgTable, serial, text, timestamp, uniqueIndex } from 'drizzle-orm/pg-core';

/** Roles, lowest to highest; see shared/contracts/roles.ts for the ordering used by checks. */
export const users = pgTable(
  'users',
  {
    id: serial('id').primaryKey(),
    email: text('email').notNull(),
    name: text('name').notNull(),
    role: text('role', { enum: ['analyst', 'operator', 'integrator', 'admin'] }).notNull(),
    passwordHash: text('password_hash').notNull(),
    disabled: boolean('disabled').notNull().default(false),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
    updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [uniqueIndex('users_email_uq').on(t.email)],
);

/** API tokens: only a SHA-256 of the secret is kept; the secret is shown once at creation. */
export const apiTokens = pgTable(
  'api_tokens',
  {
    id: serial('id').primaryKey(),
    userId: integer('user_id')
      .notNull()
      .references(() => users.id, { onDelete: 'cascade' }),
    name: text('name').notNull(),
    role: text('role', { enum: ['analyst', 'operator', 'integrator', 'admin'] }).notNull(),
    tokenHash: text('token_hash').notNull(),
    prefix: text('prefix').notNull(),
    /** null = every plant the owner can see; otherwise the plant ids this token may read. */
    plantIds: integer('plant_ids').array(),
    expiresAt: timestamp('expires_at', { withTimezone: true }).notNull(),
    revokedAt: timestamp('revoked_at', { withTimezone: true }),
    lastUsedAt: timestamp('last_used_at', { withTimezone: true }),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [uniqueIndex('api_tokens_hash_uq').on(t.tokenHash), index('api_tokens_user_idx').on(t.userId)],
);

/**
 * Signed-in sessions, one row per sign-in. The session cookie is a signed JWT that names its row
 * (`sid`); a session is valid only while its row is neither revoked nor expired, so sign-out, a
 * password or role change, and disabling a user end it at once (OWASP Session Management Cheat
 * Sheet: server-side invalidation). The id is 128 random bits, base64url.
 */
export const sessions = pgTable(
  'sessions',
  {
    id: text('id').primaryKey(),
    userId: integer('user_id')
      .notNull()
      .references(() => users.id, { onDelete: 'cascade' }),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
    lastSeenAt: timestamp('last_seen_at', { withTimezone: true }).notNull().defaultNow(),
    expiresAt: timestamp('expires_at', { withTimezone: true }).notNull(),
    revokedAt: timestamp('revoked_at', { withTimezone: true }),
    userAgent: text('user_agent'),
    ip: text('ip'),
  },
  (t) => [index('sessions_user_idx').on(t.userId)],
);

export const auditLog = pgTable(
  'audit_log',
  {
    id: bigserial('id', { mode: 'number' }).primaryKey(),
    ts: timestamp('ts', { withTimezone: true }).notNull().defaultNow(),
    userId: integer('user_id'),
    tokenId: integer('token_id'),
    actor: text('actor').notNull(),
    action: text('action').notNull(),
    target: text('target'),
    details: jsonb('details'),
    ip: text('ip'),
  },
  (t) => [index('audit_log_ts_idx').on(t.ts)],
);
