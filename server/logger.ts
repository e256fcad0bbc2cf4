import fs from 'node:fs';
import path from 'node:path';
import pino, { type Logger } from 'pino';

/**
 * The one logger (pino). Everything at `level` goes to <dataDir>/logs/<name>.log as JSON lines;
 * warnings and errors also go to stderr so the terminal running `npm start` stays readable.
 * Synchronous writes: an early exit (a start-up error) must not lose the line that explains it.
 */
export function createLogger(name: string, level: pino.LevelWithSilent, dataDir: string | null): Logger {
  if (level === 'silent' || !dataDir) return pino({ name, level });
  const dir = path.join(dataDir, 'logs');
  fs.mkdirSync(dir, { recursive: true });
  const streams: pino.StreamEntry[] = [
    { level: level as pino.Level, stream: pino.destination({ dest: path.join(dir, `${name}.log`), sync: true, mkdir: true }) },
    { level: 'warn', stream: process.stderr },
  ];
  return pino({ name, level }, pino.multistream(streams));
}
