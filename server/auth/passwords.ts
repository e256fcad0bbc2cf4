import { hash, verify } from '@node-rs/argon2';
import { randomBytes } from 'node:crypto';

/**
 * Argon2id (RFC 9106) with the library's defaults (19 MiB, t=2, p=1: the OWASP password
 * storage recommendation's first option).
 */
export function hashPassword(password: string): Promise<string> {
  return hash(password);
}

export async function verifyPassword(stored: string, password: string): Promise<boolean> {
  try {
    return await verify(stored, password);
  } catch {
    return false;
  }
}

/** A random password for generated accounts: 18 bytes of entropy, URL-safe. */
export function randomPassword(): string {
  return randomBytes(18).toString('base64url');
}

/** A hash that no password verifies against, used to keep login timing the same for unknown e-mails. */
let dummyHash: Promise<string> | undefined;
export function dummyPasswordHash(): Promise<string> {
  dummyHash ??= hash(randomPassword());
  return dummyHash;
}
