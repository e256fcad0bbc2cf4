import { createHash, randomBytes } from 'node:crypto';

/** Token secrets: "fst_" + 32 random bytes. 256 bits of entropy make a plain SHA-256 a safe stored form. */
export function newTokenSecret(): string {
  return `fst_${randomBytes(32).toString('base64url')}`;
}

export function hashToken(secret: string): string {
  return createHash('sha256').update(secret).digest('hex');
}

export function tokenPrefix(secret: string): string {
  return secret.slice(0, 10);
}
