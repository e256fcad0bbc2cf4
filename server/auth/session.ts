import { randomBytes } from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import { jwtVerify, SignJWT } from 'jose';

export const SESSION_COOKIE = 'flocstream_session';
export const SESSION_TTL_S = 12 * 3600; // one long shift

/** The session secret from the environment, else generated once into the data folder. */
export function loadSessionKey(dataDir: string, fromEnv: string | undefined): Uint8Array {
  if (fromEnv) return new TextEncoder().encode(fromEnv);
  const file = path.join(dataDir, 'session-secret');
  if (!fs.existsSync(file)) {
    fs.mkdirSync(dataDir, { recursive: true });
    fs.writeFileSync(file, randomBytes(48).toString('base64url'), { mode: 0o600, flag: 'wx' });
  }
  return new TextEncoder().encode(fs.readFileSync(file, 'utf8').trim());
}

export async function signSession(key: Uint8Array, userId: number): Promise<string> {
  return new SignJWT({})
    .setProtectedHeader({ alg: 'HS256' })
    .setSubject(String(userId))
    .setIssuedAt()
    .setExpirationTime(`${SESSION_TTL_S}s`)
    .setIssuer('flocstream')
    .sign(key);
}

/** The user id of a valid session token, or null (expired, forged, malformed). */
export async function verifySession(key: Uint8Array, token: string): Promise<number | null> {
  return (await verifySessionClaims(key, token))?.userId ?? null;
}

/** The user id and expiry [epoch ms] of a valid session token, or null (expired, forged, malformed). */
export async function verifySessionClaims(key: Uint8Array, token: string): Promise<{ userId: number; expiresAt_ms: number } | null> {
  try {
    const { payload } = await jwtVerify(token, key, { issuer: 'flocstream', algorithms: ['HS256'] });
    const id = Number(payload.sub);
    if (!Number.isInteger(id) || id <= 0 || payload.exp === undefined) return null;
    return { userId: id, expiresAt_ms: payload.exp * 1000 };
  } catch {
    return null;
  }
}
