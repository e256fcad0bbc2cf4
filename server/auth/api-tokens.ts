import { hash, randomBytes } from 'node:crypto';

/** Token secrets: "fst_" + 32 random bytes. 256 bits of entropy make a plain SHA-256 a safe stored form. */
export function newTokenSecret(): string {
  return `fst_${randomBytes(32).toString('base64url')}`;
}

export function hashToken(secret: string): string {
  // One-shot hash (no Hash object per request; same digest as createHash).
  return hash('sha256', secret, 'hex');
}

export function tokenPrefix(secret: string): string {
  return secret.slice(0, 10);
}
