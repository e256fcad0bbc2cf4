import fs from 'node:fs';
import path from 'node:path';
import pino, { type Logger } from 'pino';

/**
 * What never reaches ingest's log: credential headers, passwords, secrets and tokens in logged
 * objects (a source's options) one to three levels deep, and the user:password part of a logged
 * URL (`mqtt://ingest:…@host`). The same list as server/logger.ts (ingest imports nothing from
 * server/); OWASP Logging Cheat Sheet, "Data to exclude".
 */
const HEADERS = ['.authorization', '.cookie', '["set-cookie"]', '["x-api-key"]', '["proxy-authorization"]'];
const SECRET_KEYS = ['password', 'passwordHash', 'secret', 'token', 'apiKey', 'privateKey', 'key_pem'];
export const INGEST_REDACT_PATHS = [
  ...['headers', 'req.headers', 'res.headers', 'err.headers'].flatMap((h) => HEADERS.map((k) => `${h}${k}`)),
  ...SECRET_KEYS.flatMap((k) => [k, `*.${k}`, `*.*.${k}`, `*.*.*.${k}`]),
  ...['url', 'databaseUrl', 'mqttUrl'].flatMap((k) => [k, `*.${k}`, `*.*.${k}`]),
];

function censor(value: unknown, at: string[]): unknown {
  const key = at[at.length - 1] ?? '';
  if (/url$/i.test(key)) return typeof value === 'string' ? value.replace(/^([a-z][a-z0-9+.-]*:\/\/)[^@/?#]*@/i, '$1[redacted]@') : value;
  return value === undefined || value === null ? value : '[redacted]';
}

/**
 * Ingest's logger (pino): every line at `level` goes to `<dataDir>/logs/ingest.log` as JSON,
 * warnings and errors also to stderr, which the launcher shows in its terminal
 * (scripts/children.ts). Ingest's own copy of server/logger.ts: ingest imports nothing from
 * server/, so it can run on another host. Synchronous writes: the line that explains an early
 * exit must not be lost. The logs folder is the owner's only (700), the file 600.
 */
export function createIngestLogger(level: pino.LevelWithSilent, logsDir: string): Logger {
  const redact = { paths: INGEST_REDACT_PATHS, censor };
  if (level === 'silent') return pino({ name: 'ingest', level, redact });
  fs.mkdirSync(logsDir, { recursive: true, mode: 0o700 });
  fs.chmodSync(logsDir, 0o700);
  const file = path.join(logsDir, 'ingest.log');
  const dest = pino.destination({ dest: file, sync: true, mkdir: true, mode: 0o600 });
  fs.chmodSync(file, 0o600);
  const streams: pino.StreamEntry[] = [
    { level: level as pino.Level, stream: dest },
    { level: 'warn', stream: process.stderr },
  ];
  return pino({ name: 'ingest', level, redact }, pino.multistream(streams));
}
