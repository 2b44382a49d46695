/**
 * Expected refusals inside an action handler. Throw one of these; the wrapper turns it into
 * `{ ok: false, status, error }`. A database outage (lib/server/db-outage.ts) becomes
 * `{ ok: false, status: 503, error: MESSAGES.unavailable, retryable: true }` (routes: 503 with
 * Retry-After). Anything else thrown is a fault on our side: logged on the server, answered with
 * a generic 500 message, never with its text or stack.
 */
import type { ActionFailure, ActionStatus } from '../../domain';

export class ActionError extends Error {
  readonly status: Exclude<ActionStatus, 500 | 503>;
  readonly fields?: Record<string, string>;
  constructor(status: Exclude<ActionStatus, 500 | 503>, message: string, fields?: Record<string, string>) {
    super(message);
    this.name = 'ActionError';
    this.status = status;
    this.fields = fields;
  }
}

export const MESSAGES = {
  unauthenticated: 'Sign in to continue.',
  notFound: 'Not found. It may have been removed, or you may not have access to it.',
  forbidden: (needed: string) => `Only a team member with the ${needed} role can do this.`,
  fault: 'Something went wrong on our side and the request was not completed. Try again in a moment.',
  conflict: 'That conflicts with a change made at the same time. Reload and try again.',
  crossSite: 'Requests from other sites are not accepted. Use Borderline directly.',
  unavailable: 'The database is not answering right now. Nothing was changed; try again in a moment.',
} as const;

/** Retry-After (seconds) sent with 503 answers: about one PostgreSQL restart. */
export const RETRY_AFTER_SECONDS = 5;

export const badRequest = (message: string, fields?: Record<string, string>) => new ActionError(400, message, fields);
export const unauthenticated = () => new ActionError(401, MESSAGES.unauthenticated);
export const forbidden = (message: string) => new ActionError(403, message);
export const notFound = () => new ActionError(404, MESSAGES.notFound);
export const conflict = (message: string) => new ActionError(409, message);
export const tooLarge = (message: string) => new ActionError(413, message);
export const tooManyRequests = (message: string) => new ActionError(429, message);

export function failure(status: ActionStatus, error: string, fields?: Record<string, string>): ActionFailure {
  return fields ? { ok: false, status, error, fields } : { ok: false, status, error };
}

/** The answer to any request that met a database outage: 503, retryable, nothing changed. */
export function unavailable(): ActionFailure {
  return { ok: false, status: 503, error: MESSAGES.unavailable, retryable: true };
}

/** Headers of an HTTP answer for a failure: Retry-After on retryable ones. */
export function failureHeaders(f: ActionFailure): Record<string, string> {
  return f.retryable ? { 'retry-after': String(RETRY_AFTER_SECONDS) } : {};
}
