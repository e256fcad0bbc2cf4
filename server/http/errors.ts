/**
 * Typed errors services throw; the one error middleware (server/http/error-middleware.ts)
 * maps them to `{ error: { code, message, fields? } }` with the status code below.
 */
export class HttpError extends Error {
  constructor(
    public readonly status: number,
    public readonly code: string,
    message: string,
    public readonly fields?: Record<string, string[]>,
  ) {
    super(message);
  }
}

export class ValidationError extends HttpError {
  constructor(fields: Record<string, string[]>, message = 'invalid input') {
    super(422, 'validation_failed', message, fields);
  }
}
export class BadRequestError extends HttpError {
  constructor(message: string) {
    super(400, 'bad_request', message);
  }
}
export class UnauthorizedError extends HttpError {
  constructor(message = 'sign in or send an API token') {
    super(401, 'unauthorized', message);
  }
}
export class ForbiddenError extends HttpError {
  constructor(message = 'your role does not allow this') {
    super(403, 'forbidden', message);
  }
}
export class NotFoundError extends HttpError {
  constructor(message = 'not found') {
    super(404, 'not_found', message);
  }
}
export class UnsupportedMediaTypeError extends HttpError {
  constructor(message: string) {
    super(415, 'unsupported_media_type', message);
  }
}
export class ConflictError extends HttpError {
  constructor(message: string) {
    super(409, 'conflict', message);
  }
}
export class TooManyRequestsError extends HttpError {
  constructor(
    message: string,
    public readonly retryAfter_s: number,
  ) {
    super(429, 'too_many_requests', message);
  }
}
