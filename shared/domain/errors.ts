/**
 * Typed validation error thrown by the pure domain functions when an input is outside what
 * the method can accept (for example a settleability test that must be diluted and repeated).
 * `field` names the request field at fault, so the server's error middleware can turn it into
 * a 422 with `fields: { [field]: message }` exactly like a zod issue.
 */
export class DomainValidationError extends Error {
  readonly field: string;

  constructor(field: string, message: string) {
    super(message);
    this.name = 'DomainValidationError';
    this.field = field;
  }
}

/** True when `e` is a {@link DomainValidationError} (also across module copies, by name). */
export function isDomainValidationError(e: unknown): e is DomainValidationError {
  return e instanceof DomainValidationError || (e instanceof Error && e.name === 'DomainValidationError' && 'field' in e);
}
