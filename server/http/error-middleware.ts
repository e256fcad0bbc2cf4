import type { NextFunction, Request, Response } from 'express';
import type { Logger } from 'pino';
import { isDomainValidationError } from '../../shared/domain/errors.ts';
import { HttpError, TooManyRequestsError } from './errors.ts';

/**
 * The one error funnel: typed errors become their status and body; body-parser's errors
 * (malformed JSON, too large) become 400/413; anything else is a 500 with a generic message.
 * Stack traces go to the log, never to the client.
 */
export function errorMiddleware(log: Logger) {
  return (err: unknown, req: Request, res: Response, _next: NextFunction) => {
    if (res.headersSent) {
      req.socket.destroy();
      return;
    }
    if (err instanceof HttpError) {
      if (err instanceof TooManyRequestsError) res.setHeader('Retry-After', String(err.retryAfter_s));
      res.status(err.status).json({ error: { code: err.code, message: err.message, ...(err.fields ? { fields: err.fields } : {}) } });
      return;
    }
    if (isDomainValidationError(err)) {
      res.status(422).json({ error: { code: 'validation_failed', message: err.message, fields: { [err.field]: [err.message] } } });
      return;
    }
    const e = err as { type?: string; status?: number; message?: string; code?: unknown };
    // PostgreSQL cancelled the statement at the API pool's statement_timeout (SQLSTATE 57014, query_canceled).
    if (e?.code === '57014') {
      res.status(503).json({ error: { code: 'query_timeout', message: 'the database query took too long and was cancelled; narrow the request (a shorter time range) or try again' } });
      return;
    }
    if (e?.type === 'entity.parse.failed') {
      res.status(400).json({ error: { code: 'malformed_json', message: 'the request body is not valid JSON' } });
      return;
    }
    if (e?.type === 'entity.too.large') {
      res.status(413).json({ error: { code: 'too_large', message: 'the request body is too large' } });
      return;
    }
    if (typeof e?.status === 'number' && e.status >= 400 && e.status < 500) {
      res.status(e.status).json({ error: { code: 'bad_request', message: 'the request could not be read' } });
      return;
    }
    log.error({ err, path: req.path }, 'unhandled error');
    res.status(500).json({ error: { code: 'internal', message: 'internal error; the server log has the details' } });
  };
}
