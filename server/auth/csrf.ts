import type { NextFunction, Request, Response } from 'express';
import { ForbiddenError } from '../http/errors.ts';
import { SESSION_COOKIE } from './session.ts';

/**
 * Cross-site request forgery guard for requests the browser authenticates by itself (the
 * session cookie). SameSite=Strict does not stop a page of the same *site* on another port or
 * subdomain, and a `text/plain` form or fetch needs no CORS preflight, so a state-changing
 * request (POST, PUT, PATCH, DELETE) that carries the session cookie must show that it comes
 * from this origin (OWASP CSRF Prevention Cheat Sheet: "Verifying Origin with standard headers",
 * "Fetch Metadata headers"):
 *
 * - `Origin` equal to the request's own origin (scheme, Host header: host and port) or to one
 *   of `allowedOrigins` (FLOCSTREAM_ALLOWED_ORIGINS, e.g. a reverse proxy's public name);
 *   `Origin: null` never matches;
 * - or, when no `Origin` is sent, `Sec-Fetch-Site: same-origin` (Fetch Metadata, W3C);
 * - and a body, if any, typed `application/json` or `text/csv` (the only bodies the API reads;
 *   a cross-origin page can send neither without a CORS preflight, which this server never
 *   grants).
 *
 * Callers with `Authorization: Bearer` are not subject to it (a browser never adds that header by
 * itself). The sign-in is guarded too against login CSRF (signing a victim into the attacker's
 * account): a browser always sends `Origin` on a POST, so a foreign one is refused; a client
 * sending neither header (a script) may sign in.
 */
export interface CsrfOptions {
  allowedOrigins: readonly string[];
}

const SAFE = new Set(['GET', 'HEAD', 'OPTIONS']);
const BODY_TYPES = ['application/json', 'text/csv'];

function hasBody(req: Request): boolean {
  const len = req.headers['content-length'];
  return req.headers['transfer-encoding'] !== undefined || (len !== undefined && len !== '0') || req.headers['content-type'] !== undefined;
}

/** The request's own origin as a browser would write it (scheme://host[:port]), or null without a Host header. */
function ownOrigin(req: Request): string | null {
  const host = req.headers.host;
  if (!host) return null;
  try {
    return new URL(`${req.protocol}://${host}`).origin;
  } catch {
    return null;
  }
}

/** Null when the request passes, otherwise why it is refused. */
export function csrfRefusal(req: Request, opts: CsrfOptions): string | null {
  if (SAFE.has(req.method)) return null;
  if (req.headers.authorization !== undefined) return null;
  const isLogin = req.path === '/auth/login';
  const cookie = (req.cookies as Record<string, string> | undefined)?.[SESSION_COOKIE];
  if (!cookie && !isLogin) return null;

  const origin = req.headers.origin;
  const fetchSite = req.headers['sec-fetch-site'];
  if (origin !== undefined) {
    const own = ownOrigin(req);
    if (origin !== own && !opts.allowedOrigins.includes(origin)) return `cross-origin request refused: Origin ${origin} is not this server's origin (${own ?? 'unknown'})`;
  } else if (fetchSite !== undefined) {
    if (fetchSite !== 'same-origin') return `cross-origin request refused: Sec-Fetch-Site is ${String(fetchSite)}`;
  } else if (!isLogin) {
    return 'a signed-in write must come from this origin: send an Origin header (browsers do) or use an API token';
  }
  if (hasBody(req)) {
    const type = (req.headers['content-type'] ?? '').split(';')[0]!.trim().toLowerCase();
    if (!BODY_TYPES.includes(type)) return `a signed-in write must send JSON or CSV (Content-Type application/json or text/csv), not ${type || 'no content type'}`;
  }
  return null;
}

/** Express middleware: 403 with the reason when `csrfRefusal` refuses. Mount after cookie-parser. */
export function csrfGuard(opts: CsrfOptions) {
  return (req: Request, _res: Response, next: NextFunction) => {
    const why = csrfRefusal(req, opts);
    next(why ? new ForbiddenError(why) : undefined);
  };
}
