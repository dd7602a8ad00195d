// The failures domain code reports, named by what went wrong. Only http/middleware/errors.ts turns them into HTTP
// statuses (STATUS_OF); domain, jobs and thread code never speak HTTP.
import type { ZodError } from 'zod';

export type DomainErrorKind =
  | 'invalid' // the request breaks a rule of its own content
  | 'not-signed-in' // no valid identity (wrong password at sign-in)
  | 'forbidden' // the actor may not do this
  | 'not-found'
  | 'conflict' // the request clashes with the records' current state
  | 'not-text' // a file that is not UTF-8 text (a spreadsheet, a compressed file)
  | 'refused' // well-formed, but the content is refused (an identifier in a file, nothing left to store)
  | 'too-many-tries' // locked after repeated wrong passwords
  | 'failed' // our own failure, already rolled back; safe to show
  | 'unavailable'; // a part the answer needs is not there now; try again

/** A known failure with a message that is safe to show, and details the client may use. */
export class DomainError extends Error {
  constructor(
    public kind: DomainErrorKind,
    message: string,
    public details?: unknown,
  ) {
    super(message);
  }
}

export const invalid = (message: string, details?: unknown) => new DomainError('invalid', message, details);
export const notFound = (what: string) => new DomainError('not-found', `${what} not found`);
export const forbidden = (message = 'your role may not do this') => new DomainError('forbidden', message);
export const conflict = (message: string, details?: unknown) => new DomainError('conflict', message, details);
export const refused = (message: string, details?: unknown) => new DomainError('refused', message, details);

export function zodMessage(err: ZodError): string {
  return err.issues.map((i) => (i.path.length ? `${i.path.join('.')}: ${i.message}` : i.message)).join('; ');
}
