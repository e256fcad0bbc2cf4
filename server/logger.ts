import fs from 'node:fs';
import path from 'node:path';
import pino, { type Logger } from 'pino';

/**
 * What never reaches a log line: credential-carrying headers wherever a request, a response or
 * an error puts them (Authorization, Cookie, Set-Cookie, X-Api-Key), passwords, secrets and
 * tokens in logged objects (a source's options, a user being created) one to three levels deep,
 * and the user:password part of a logged URL (`mqtt://ingest:…@host`), which is kept without it.
 * OWASP Logging Cheat Sheet, "Data to exclude". Applied to every child logger as well (pino's
 * `redact` belongs to the root). ingest/logger.ts keeps the same list (ingest imports nothing
 * from server/).
 */
const HEADERS = ['.authorization', '.cookie', '["set-cookie"]', '["x-api-key"]', '["proxy-authorization"]'];
const SECRET_KEYS = ['password', 'passwordHash', 'secret', 'token', 'apiKey', 'sessionSecret', 'privateKey', 'key_pem'];
export const REDACT_PATHS = [
  ...['req.headers', 'res.headers', 'headers', 'err.headers', 'err.config.headers', 'request.headers', 'response.headers'].flatMap((h) => HEADERS.map((k) => `${h}${k}`)),
  ...SECRET_KEYS.flatMap((k) => [k, `*.${k}`, `*.*.${k}`, `*.*.*.${k}`]),
  ...['url', 'databaseUrl', 'mqttUrl'].flatMap((k) => [k, `*.${k}`, `*.*.${k}`]),
];

/** Censor: a URL loses only its user:password part; anything else is replaced. */
export function censor(value: unknown, at: string[]): unknown {
  const key = at[at.length - 1] ?? '';
  if (/url$/i.test(key)) {
    if (typeof value !== 'string') return value;
    return value.replace(/^([a-z][a-z0-9+.-]*:\/\/)[^@/?#]*@/i, '$1[redacted]@');
  }
  return value === undefined || value === null ? value : '[redacted]';
}

/** Creates `dir` (and parents) for the owner only; an existing one loses group and other read/write (search for others stays, the private cluster's postgres user needs it). */
export function ensurePrivateDir(dir: string): void {
  fs.mkdirSync(dir, { recursive: true, mode: 0o700 });
  const mode = fs.statSync(dir).mode & 0o777;
  const want = 0o700 | (mode & 0o001);
  if (mode !== want) fs.chmodSync(dir, want);
}

/** A log file opened for appending, readable and writable by the owner only (mode 600, also when it existed before). */
export function privateLogFile(file: string): pino.DestinationStream {
  const dest = pino.destination({ dest: file, sync: true, mkdir: true, mode: 0o600 });
  fs.chmodSync(file, 0o600);
  return dest;
}

/**
 * The one logger (pino). Everything at `level` goes to <dataDir>/logs/<name>.log as JSON lines;
 * warnings and errors also go to stderr so the terminal running `npm start` stays readable.
 * Synchronous writes: an early exit (a start-up error) must not lose the line that explains it.
 * The data folder and its logs folder are the owner's only (700), the file 600.
 */
export function createLogger(name: string, level: pino.LevelWithSilent, dataDir: string | null): Logger {
  const redact = { paths: REDACT_PATHS, censor };
  if (level === 'silent' || !dataDir) return pino({ name, level, redact });
  ensurePrivateDir(dataDir);
  const dir = path.join(dataDir, 'logs');
  ensurePrivateDir(dir);
  const streams: pino.StreamEntry[] = [
    { level: level as pino.Level, stream: privateLogFile(path.join(dir, `${name}.log`)) },
    { level: 'warn', stream: process.stderr },
  ];
  return pino({ name, level, redact }, pino.multistream(streams));
}
