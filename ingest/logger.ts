import fs from 'node:fs';
import path from 'node:path';
import pino, { type Logger } from 'pino';

/**
 * Ingest's logger (pino): every line at `level` goes to `<dataDir>/logs/ingest.log` as JSON,
 * warnings and errors also to stderr, which the launcher shows in its terminal
 * (scripts/children.ts). Ingest's own copy of server/logger.ts: ingest imports nothing from
 * server/, so it can run on another host. Synchronous writes: the line that explains an early
 * exit must not be lost.
 */
export function createIngestLogger(level: pino.LevelWithSilent, logsDir: string): Logger {
  if (level === 'silent') return pino({ name: 'ingest', level });
  fs.mkdirSync(logsDir, { recursive: true });
  const streams: pino.StreamEntry[] = [
    { level: level as pino.Level, stream: pino.destination({ dest: path.join(logsDir, 'ingest.log'), sync: true, mkdir: true }) },
    { level: 'warn', stream: process.stderr },
  ];
  return pino({ name: 'ingest', level }, pino.multistream(streams));
}
