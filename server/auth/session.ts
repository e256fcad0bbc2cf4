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

/** 128 random bits naming a `sessions` row (base64url). */
export function newSessionId(): string {
  return randomBytes(16).toString('base64url');
}

/** The cookie of session `sessionId` of `userId`: a JWT (HS256) that names its `sessions` row in `sid`. */
export async function signSession(key: Uint8Array, userId: number, sessionId: string): Promise<string> {
  return new SignJWT({ sid: sessionId })
    .setProtectedHeader({ alg: 'HS256' })
    .setSubject(String(userId))
    .setIssuedAt()
    .setExpirationTime(`${SESSION_TTL_S}s`)
    .setIssuer('flocstream')
    .sign(key);
}

export interface SessionClaims {
  userId: number;
  sessionId: string;
  expiresAt_ms: number;
}

/**
 * The user id, session id and expiry [epoch ms] of a well-signed, unexpired session token, or
 * null (expired, forged, malformed, or from before sessions were kept server-side). Whether the
 * session still stands is the `sessions` row's to say.
 */
export async function verifySessionClaims(key: Uint8Array, token: string): Promise<SessionClaims | null> {
  try {
    const { payload } = await jwtVerify(token, key, { issuer: 'flocstream', algorithms: ['HS256'] });
    const id = Number(payload.sub);
    const sid = payload.sid;
    if (!Number.isInteger(id) || id <= 0 || payload.exp === undefined || typeof sid !== 'string' || !/^[\w-]{16,64}$/.test(sid)) return null;
    return { userId: id, sessionId: sid, expiresAt_ms: payload.exp * 1000 };
  } catch {
    return null;
  }
}
