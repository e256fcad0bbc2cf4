/**
 * Ingest process entry point: `node --import tsx ingest/main.ts` with DATABASE_URL (and
 * FLOCSTREAM_DATA_DIR for its local spool, log and PKI). Talks to the API only through
 * PostgreSQL: a heartbeat row in `ingest_workers` every INGEST_STATUS_MS, MQTT topics in
 * `mqtt_discovery`, NOTIFY/LISTEN on `flocstream_ingest` (shared/contracts/ingest-events.ts).
 * Logs to `<dataDir>/logs/ingest.log`, warnings also to stderr. SIGINT/SIGTERM: stop
 * receiving, final flush (commit or spool), last heartbeat marked stopped, exit 0.
 */
import { IngestConfigError, ingestPaths, loadIngestConfig } from './config.ts';
import { IngestService } from './ingest-service.ts';
import { createIngestLogger } from './logger.ts';

let cfg;
try {
  cfg = loadIngestConfig();
} catch (err) {
  console.error(err instanceof IngestConfigError ? err.message : err);
  process.exit(2);
}
const log = createIngestLogger(cfg.logLevel, ingestPaths(cfg.dataDir).logsDir);

const svc = await IngestService.start(cfg, log).catch((err: unknown) => {
  log.fatal({ err }, 'ingest failed to start');
  process.exit(1);
});
log.info({ pid: process.pid, workerId: svc.registry.id, host: svc.registry.host, dataDir: cfg.dataDir }, 'ingest running');

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
