import fs from 'node:fs';
import type { IncomingMessage, ServerResponse } from 'node:http';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import cookieParser from 'cookie-parser';
import express, { type Express, type RequestHandler, Router } from 'express';
import helmet from 'helmet';
import { pinoHttp } from 'pino-http';
import { services, type AppContext } from './app-context.ts';
import { credentialCache } from './auth/credential-cache.ts';
import { csrfGuard } from './auth/csrf.ts';
import { authenticate } from './auth/middleware.ts';
import { errorMiddleware } from './http/error-middleware.ts';
import { NotFoundError } from './http/errors.ts';
import { buildOpenApi } from './http/openapi.ts';
import { rateLimit } from './http/rate-limit.ts';
import { defineRoute, mount, type RouteDef } from './http/route.ts';
import { authRoutes } from './routes/auth.routes.ts';
import { calcRoutes } from './routes/calc.routes.ts';
import { labRoutes } from './routes/lab.routes.ts';
import { alarmsRoutes } from './routes/alarms.routes.ts';
import { outboxRoutes } from './routes/outbox.routes.ts';
import { plantModelRoutes } from './routes/plant-model.routes.ts';
import { plantsRoutes } from './routes/plants.routes.ts';
import { settingsRoutes } from './routes/settings.routes.ts';
import { streamRoutes } from './routes/stream.routes.ts';
import { tokensRoutes } from './routes/tokens.routes.ts';
import { usersRoutes } from './routes/users.routes.ts';
import { wiringRoutes } from './routes/wiring.routes.ts';
import { historyRoutes } from './routes/history.routes.ts';
import { ingestStatusRoutes } from './routes/ingest-status.routes.ts';

export const VERSION = '0.1.0';
const DIST = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '../dist');

/** Every /api/v1 route of the product, in one list (mounted, documented and role-tested from it). */
export function apiRoutes(ctx: AppContext): RouteDef[] {
  const defs: RouteDef[] = [...authRoutes(ctx), ...usersRoutes(ctx), ...tokensRoutes(ctx), ...calcRoutes(ctx), ...plantsRoutes(ctx), ...labRoutes(ctx), ...streamRoutes(ctx)];
  defs.push(...alarmsRoutes(ctx));
  defs.push(...settingsRoutes(ctx));
  defs.push(...outboxRoutes(ctx));
  defs.push(...wiringRoutes(ctx));
  defs.push(...ingestStatusRoutes(ctx));
  defs.push(...historyRoutes(ctx));
  defs.push(...plantModelRoutes(ctx));
  const doc = () => buildOpenApi(defs, VERSION);
  let cached: object | undefined;
  defs.push(
    defineRoute({
      method: 'get',
      path: '/openapi.json',
      role: 'public',
      tag: 'meta',
      summary: 'This OpenAPI document',
      handler: () => (cached ??= doc()),
    }),
  );
  return defs;
}

/**
 * One log line per request, without putting logging on the read path. Successful GETs (the
 * monitor polls several a second) are logged at debug: while the logger is above debug a GET
 * skips pino-http altogether (it binds a child logger per request, which showed in the CPU profile
 * of `npm run bench:api -- --cpu-prof`), and only a GET that fails gets its line, written once the
 * answer is sent (4xx at info, 5xx at error; the stack of a 500 is logged by the error funnel).
 * Writes go through pino-http at info as before. The request is logged as id, method, URL and
 * address only — no Cookie or Authorization header ends up in a log file.
 */
function requestLogger(ctx: AppContext): RequestHandler {
  const reqOut = (req: IncomingMessage & { id?: unknown; originalUrl?: string }) => ({ id: req.id, method: req.method, url: req.originalUrl ?? req.url, remoteAddress: req.socket?.remoteAddress });
  const resOut = (res: ServerResponse) => ({ statusCode: res.statusCode });
  const isRead = (req: IncomingMessage) => req.method === 'GET' || req.method === 'HEAD';
  const full = pinoHttp({
    logger: ctx.log,
    autoLogging: { ignore: (req) => req.url === '/api/health' },
    wrapSerializers: false,
    serializers: { req: reqOut, res: resOut },
    customLogLevel: (req, res, err) => {
      if (err || res.statusCode >= 500) return 'error';
      if (isRead(req) && res.statusCode < 400) return 'debug';
      return 'info';
    },
  });
  return (req, res, next) => {
    if (!isRead(req) || ctx.log.isLevelEnabled('debug')) return full(req, res, next);
    const t0 = Date.now();
    res.once('finish', () => {
      if (res.statusCode < 400) return;
      ctx.log[res.statusCode >= 500 ? 'error' : 'info']({ req: reqOut(req), res: resOut(res), responseTime: Date.now() - t0 }, 'request completed');
    });
    next();
  };
}

/**
 * Read-your-writes over the replica (server/services/read-routing.service.ts): a write request
 * of a signed-in caller holds that user's reads on the primary from its start until, after its
 * answer, the primary's WAL position is recorded as the user's fence. Nothing to do without a
 * replica.
 */
function writeFences(ctx: AppContext): RequestHandler {
  const { routing } = services(ctx).reads;
  return (req, res, next) => {
    if (!routing.hasReplica || req.method === 'GET' || req.method === 'HEAD' || !req.principal) return next();
    const end = routing.beginWrite(req.principal.userId);
    const done = () => void end().catch((err) => ctx.log.warn({ err }, 'read fence not recorded; this user reads the replica at once'));
    res.once('finish', done);
    res.once('close', done);
    next();
  };
}

export function createApp(ctx: AppContext, opts: { serveMonitor?: boolean } = {}): Express {
  const app = express();
  app.disable('x-powered-by');
  // No ETag on API answers: they are computed live per request, so a validator saves only the
  // transfer of an unchanged body while res.send hashes every body for it (SHA-1 over ~200 kB on
  // a year's trend, a few per cent of that request's CPU in a profile of `npm run bench:api`).
  // The monitor's static files keep theirs (express.static sets its own).
  app.set('etag', false);
  // X-Forwarded-For / -Proto are believed only from the proxies configured (FLOCSTREAM_TRUST_PROXY);
  // by default the address is the socket's, so a client cannot pick the address the sign-in
  // throttle counts and the audit log shows.
  app.set('trust proxy', ctx.config.trustProxy);
  app.use(
    helmet({
      contentSecurityPolicy: {
        directives: { defaultSrc: ["'self'"], imgSrc: ["'self'", 'data:', 'blob:'], styleSrc: ["'self'", "'unsafe-inline'"], connectSrc: ["'self'"], upgradeInsecureRequests: null },
      },
      strictTransportSecurity: false,
    }),
  );
  app.use(requestLogger(ctx));
  app.use(express.json({ limit: '256kb' }));
  app.use(cookieParser());

  app.get('/api/health', async (_req, res) => {
    const t0 = performance.now();
    let database: { ok: boolean; latency_ms?: number; error?: string };
    try {
      await ctx.db.pool.query('SELECT 1');
      database = { ok: true, latency_ms: Math.round((performance.now() - t0) * 10) / 10 };
    } catch {
      database = { ok: false, error: 'database unreachable' };
    }
    res.status(database.ok ? 200 : 503).json({ status: database.ok ? 'ok' : 'degraded', version: VERSION, database });
  });

  // The recovery command (scripts/admin.ts) clears a lock-out through NOTIFY flocstream_auth.
  credentialCache(ctx).onChange((c) => {
    if ('unlockUserId' in c) services(ctx).auth.unlock(c.unlockUserId).catch((err) => ctx.log.warn({ err }, 'sign-in unlock failed'));
  });

  const api = Router();
  api.use(csrfGuard({ allowedOrigins: ctx.config.allowedOrigins }));
  api.use(authenticate(ctx));
  api.use(writeFences(ctx));
  api.use(rateLimit());
  mount(api, apiRoutes(ctx));
  api.use((_req, _res, next) => next(new NotFoundError('no such API route')));
  app.use('/api/v1', api);
  app.use('/api', (_req, _res, next) => next(new NotFoundError('no such API route')));

  if (opts.serveMonitor !== false && fs.existsSync(path.join(DIST, 'index.html'))) {
    app.use(express.static(DIST, { index: false, maxAge: '1h' }));
    // Client-side routes: every other GET is the monitor.
    app.get(/.*/, (_req, res) => res.sendFile(path.join(DIST, 'index.html')));
  }
  app.use(errorMiddleware(ctx.log));
  return app;
}
