import { z } from 'zod';
import { roleSchema } from './roles.ts';

export const email = z.email({ message: 'must be an e-mail address' }).max(254).transform((s) => s.toLowerCase());
export const password = z.string().min(12, 'at least 12 characters').max(256);

export const loginRequest = z.object({ email, password: z.string().min(1, 'required').max(256) }).strict();
export type LoginRequest = z.infer<typeof loginRequest>;

export const me = z.object({ id: z.number().int(), email: z.string(), name: z.string(), role: roleSchema, viaToken: z.boolean() });
export type Me = z.infer<typeof me>;

export const userOut = z.object({
  id: z.number().int(),
  email: z.string(),
  name: z.string(),
  role: roleSchema,
  disabled: z.boolean(),
  createdAt: z.iso.datetime(),
});
export type UserOut = z.infer<typeof userOut>;

export const createUserRequest = z.object({ email, name: z.string().trim().min(1, 'required').max(120), role: roleSchema, password }).strict();
export const updateUserRequest = z
  .object({ name: z.string().trim().min(1).max(120).optional(), role: roleSchema.optional(), password: password.optional(), disabled: z.boolean().optional() })
  .strict()
  .refine((v) => Object.keys(v).length > 0, { message: 'nothing to change' });

export const idParam = z.object({ id: z.coerce.number().int().positive() });

export const tokenOut = z.object({
  id: z.number().int(),
  name: z.string(),
  role: roleSchema,
  prefix: z.string(),
  plantIds: z.array(z.number().int()).nullable(),
  expiresAt: z.iso.datetime(),
  revokedAt: z.iso.datetime().nullable(),
  lastUsedAt: z.iso.datetime().nullable(),
  createdAt: z.iso.datetime(),
});
export type TokenOut = z.infer<typeof tokenOut>;

export const createTokenRequest = z
  .object({
    name: z.string().trim().min(1, 'required').max(80),
    role: roleSchema,
    expiresInDays: z.number().int('whole days').min(1).max(366),
    plantIds: z.array(z.number().int().positive()).min(1).max(100).optional(),
  })
  .strict();
export type CreateTokenRequest = z.infer<typeof createTokenRequest>;
export const createTokenResponse = z.object({ id: z.number().int(), token: z.string(), expiresAt: z.iso.datetime() });
