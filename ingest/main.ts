/**
 * Ingest process entry point: `tsx ingest/main.ts` with DATABASE_URL and FLOCSTREAM_DATA_DIR.
 * Writes `<dataDir>/ingest-status.json` every INGEST_STATUS_MS and, per MQTT source,
 * `<dataDir>/ingest-discovery/source-<id>.json`. SIGINT/SIGTERM: stop receiving, final flush
 * (commit or spool), exit 0.
 */
import '../server/broker/quiet-debug.ts';
import { useFastPathParsers } from '../server/broker/publish-fast-path.ts';
import pino from 'pino';
import { IngestConfigError, loadIngestConfig } from './config.ts';
import { IngestService } from './ingest-service.ts';

let cfg;
try {
  cfg = loadIngestConfig();
} catch (err) {
  console.error(err instanceof IngestConfigError ? err.message : err);
  process.exit(2);
}
const log = pino({ name: 'ingest', level: cfg.logLevel });
// mqtt.js creates its packet parser on each connect; from here on those have the fast path.
useFastPathParsers();

const svc = await IngestService.start(cfg, log).catch((err: unknown) => {
  log.fatal({ err }, 'ingest failed to start');
  process.exit(1);
});
log.info({ pid: process.pid, dataDir: cfg.dataDir }, 'ingest running');

let stopping = false;
for (const sig of ['SIGINT', 'SIGTERM'] as const) {
  process.on(sig, () => {
    if (stopping) return;
    stopping = true;
    log.info({ signal: sig }, 'stopping: final flush');
    const force = setTimeout(() => {
      log.error('final flush took longer than 20 s; exiting');
      process.exit(1);
    }, 20_000);
    svc.stop().then(
      () => {
        clearTimeout(force);
        process.exit(0);
      },
      (err: unknown) => {
        log.error({ err }, 'error during stop');
        process.exit(1);
      },
    );
  });
}
// A defect in a library callback must not silently stop ingest; it is logged and the process
// exits non-zero so the launcher restarts it (acknowledged data is committed or spooled).
process.on('uncaughtException', (err) => {
  log.fatal({ err }, 'uncaught exception');
  process.exit(1);
});
process.on('unhandledRejection', (err) => {
  log.error({ err }, 'unhandled rejection');
});
