import path from 'node:path';
import { z } from 'zod';

/**
 * The only place that reads process.env (house rule 8). Validated with zod so a bad value
 * fails at start with a readable list instead of somewhere deep inside.
 */
const port = z.coerce.number().int().min(1).max(65535);
const envSchema = z.object({
  PORT: port.default(3000),
  HOST: z.string().default('127.0.0.1'),
  FLOCSTREAM_DATA_DIR: z.string().default('.data'),
  FLOCSTREAM_PG_PORT: port.default(54329),
  DATABASE_URL: z.url().optional(),
  /** A streaming replica of the database for the read routes (samples, balance history, lab results, CSV exports). */
  DATABASE_READ_URL: z.url().optional(),
  FLOCSTREAM_ADMIN_EMAIL: z.email().optional(),
  FLOCSTREAM_ADMIN_PASSWORD: z.string().min(12, 'must be at least 12 characters').optional(),
  FLOCSTREAM_SESSION_SECRET: z.string().min(32, 'must be at least 32 characters').optional(),
  FLOCSTREAM_DEMO: z.enum(['0', '1']).default('1'),
  FLOCSTREAM_DEMO_HISTORY_DAYS: z.coerce.number().int().min(0).max(400).default(35),
  MQTT_URL: z.url().optional(),
  FLOCSTREAM_MQTT_PORT: port.default(18830),
  FLOCSTREAM_SIM_OPCUA_PORT: port.default(48410),
  FLOCSTREAM_SIM_SCENARIO: z.string().regex(/^[a-z0-9-]+$/).default('demo'),
  FLOCSTREAM_SIM_SPEED: z.coerce.number().min(1).max(3600).optional(),
  REDIS_URL: z.url().optional(),
  SMTP_URL: z.url().optional(),
  FLOCSTREAM_MAIL_CATCHER_PORT: port.optional(),
  LOG_LEVEL: z.enum(['fatal', 'error', 'warn', 'info', 'debug', 'trace', 'silent']).default('info'),
  NODE_ENV: z.string().default('production'),
  /** The embedded broker closes a connection that sends a larger MQTT packet (server/broker/packet-limit.ts). */
  FLOCSTREAM_MQTT_MAX_PACKET_BYTES: z.coerce.number().int().min(1024).max(256 * 1024 * 1024).default(1024 * 1024),
  /** With DATABASE_URL (the owner, for migrations): the API's and ingest's own roles (server/db/roles.ts). */
  FLOCSTREAM_API_DATABASE_URL: z.url().optional(),
  INGEST_DATABASE_URL: z.url().optional(),
  /** Ingest worker processes `npm start` supervises (they share the sources through leases, ingest/source-leases.ts). */
  INGEST_WORKERS: z.coerce.number().int().min(1).max(16).default(1),
  FLOCSTREAM_API_STATEMENT_TIMEOUT_MS: z.coerce.number().int().min(100).max(600_000).default(10_000),
  FLOCSTREAM_CALC_WORKERS: z.coerce.number().int().min(1).max(8).default(1),
  FLOCSTREAM_CALC_QUEUE: z.coerce.number().int().min(0).max(1000).default(8),
  FLOCSTREAM_CALC_BUDGET_MS: z.coerce.number().int().min(10).max(60_000).default(2_000),
  FLOCSTREAM_CALC_TIMEOUT_MS: z.coerce.number().int().min(100).max(120_000).default(5_000),
  FLOCSTREAM_CALC_SETTLER_MAX_STEPS: z.coerce.number().int().min(100).max(10_000_000).default(200_000),
  FLOCSTREAM_TRUST_PROXY: z
    .string()
    .regex(/^(\d+|[\w.:/]+(\s*,\s*[\w.:/]+)*)$/, 'a hop count, or a comma-separated list of addresses, subnets or loopback/linklocal/uniquelocal')
    .optional(),
  FLOCSTREAM_ALLOWED_ORIGINS: z
    .string()
    .transform((s, c) => {
      const out: string[] = [];
      for (const part of s.split(',').map((p) => p.trim()).filter(Boolean)) {
        const u = URL.canParse(part) ? new URL(part) : null;
        if (!u || (u.protocol !== 'http:' && u.protocol !== 'https:') || u.origin !== part.replace(/\/$/, '')) {
          c.addIssue({ code: 'custom', message: `${part} is not an origin (scheme://host[:port], nothing after)` });
          return z.NEVER;
        }
        out.push(u.origin);
      }
      return out;
    })
    .optional(),
});

export type Config = {
  port: number;
  host: string;
  dataDir: string;
  pgPort: number;
  databaseUrl: string | undefined;
  ingestWorkers: number;
  /**
   * A hot standby fed by PostgreSQL streaming replication (e.g. made with `pg_basebackup -R`):
   * the read routes answer from it, everything else from the primary (server/services/read-routing.service.ts).
   * It connects as the API does on the primary (the same roles exist on a physical replica).
   */
  databaseReadUrl: string | undefined;
  adminEmail: string | undefined;
  adminPassword: string | undefined;
  sessionSecret: string | undefined;
  demo: boolean;
  /** Days of simulated history the demo loads at its first start (0: none). */
  demoHistoryDays: number;
  mqttUrl: string | undefined;
  mqttPort: number;
  simOpcuaPort: number;
  simScenario: string;
  simSpeed: number | undefined;
  redisUrl: string | undefined;
  smtpUrl: string | undefined;
  /** Port of the built-in SMTP catcher; undefined: the global setting mail.catcher_port. */
  mailCatcherPort: number | undefined;
  logLevel: z.infer<typeof envSchema>['LOG_LEVEL'];
  secureCookies: boolean;
  mqttMaxPacketBytes: number;
  apiDatabaseUrl: string | undefined;
  ingestDatabaseUrl: string | undefined;
  /** PostgreSQL statement_timeout of every API pool connection (ingest and migrations have their own connections). */
  apiStatementTimeout_ms: number;
  /** Calculator worker pool (server/services/calc.service.ts): workers, waiting requests beyond them (more → 503), time budget handed to the solver, hard timeout that terminates a worker, settler step budget. */
  calc: { workers: number; queue: number; budget_ms: number; timeout_ms: number; settlerMaxSteps: number };
  /**
   * Express's `trust proxy` (whose X-Forwarded-For and X-Forwarded-Proto to believe): off unless
   * set, so a client cannot choose the address the sign-in throttle and the audit log see.
   */
  trustProxy: number | string | false;
  /** Origins besides the request's own whose cookie-authenticated writes are accepted (server/auth/csrf.ts). */
  allowedOrigins: string[];
};

export class ConfigError extends Error {}

export function loadConfig(env: NodeJS.ProcessEnv = process.env): Config {
  const parsed = envSchema.safeParse(env);
  if (!parsed.success) {
    const lines = parsed.error.issues.map((i) => `  ${i.path.join('.')}: ${i.message}`);
    throw new ConfigError(`invalid environment:\n${lines.join('\n')}`);
  }
  const e = parsed.data;
  return {
    port: e.PORT,
    host: e.HOST,
    dataDir: path.resolve(e.FLOCSTREAM_DATA_DIR),
    pgPort: e.FLOCSTREAM_PG_PORT,
    databaseUrl: e.DATABASE_URL,
    databaseReadUrl: e.DATABASE_READ_URL,
    adminEmail: e.FLOCSTREAM_ADMIN_EMAIL,
    adminPassword: e.FLOCSTREAM_ADMIN_PASSWORD,
    sessionSecret: e.FLOCSTREAM_SESSION_SECRET,
    demo: e.FLOCSTREAM_DEMO === '1',
    demoHistoryDays: e.FLOCSTREAM_DEMO_HISTORY_DAYS,
    mqttUrl: e.MQTT_URL,
    mqttPort: e.FLOCSTREAM_MQTT_PORT,
    simOpcuaPort: e.FLOCSTREAM_SIM_OPCUA_PORT,
    simScenario: e.FLOCSTREAM_SIM_SCENARIO,
    simSpeed: e.FLOCSTREAM_SIM_SPEED,
    mailCatcherPort: e.FLOCSTREAM_MAIL_CATCHER_PORT,
    redisUrl: e.REDIS_URL,
    smtpUrl: e.SMTP_URL,
    logLevel: e.LOG_LEVEL,
    // The product binds to 127.0.0.1 over plain HTTP by default; behind TLS set NODE_ENV=production-tls.
    secureCookies: e.NODE_ENV === 'production-tls',
    mqttMaxPacketBytes: e.FLOCSTREAM_MQTT_MAX_PACKET_BYTES,
    apiDatabaseUrl: e.FLOCSTREAM_API_DATABASE_URL,
    ingestDatabaseUrl: e.INGEST_DATABASE_URL,
    ingestWorkers: e.INGEST_WORKERS,
    apiStatementTimeout_ms: e.FLOCSTREAM_API_STATEMENT_TIMEOUT_MS,
    calc: {
      workers: e.FLOCSTREAM_CALC_WORKERS,
      queue: e.FLOCSTREAM_CALC_QUEUE,
      budget_ms: e.FLOCSTREAM_CALC_BUDGET_MS,
      timeout_ms: Math.max(e.FLOCSTREAM_CALC_TIMEOUT_MS, e.FLOCSTREAM_CALC_BUDGET_MS + 500),
      settlerMaxSteps: e.FLOCSTREAM_CALC_SETTLER_MAX_STEPS,
    },
    trustProxy: e.FLOCSTREAM_TRUST_PROXY === undefined ? false : /^\d+$/.test(e.FLOCSTREAM_TRUST_PROXY) ? Number(e.FLOCSTREAM_TRUST_PROXY) : e.FLOCSTREAM_TRUST_PROXY,
    allowedOrigins: e.FLOCSTREAM_ALLOWED_ORIGINS ?? [],
  };
}
