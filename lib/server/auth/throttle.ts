/**
 * Sign-in throttling with exponential back-off, per account and per address, stored in the
 * LoginThrottle table so that it holds across restarts and across server processes.
 *
 * Every sign-in attempt first *reserves* a failure on both keys (address first, then account):
 * a burst of parallel guesses cannot slip through while the first ones are still being hashed,
 * because each reservation is a compare-and-set on the row. A successful sign-in then clears the
 * account's row and gives back the address's reservation.
 *
 * For a key with n counted failures, the next attempt is refused until
 *   lastFailure + delay(n),   delay(n) = 0                                   for n ≤ free
 *                             delay(n) = min(base · 2^(n − free − 1), cap)   otherwise
 * and the count leaks away by one failure per `decayMs` without failures.
 *
 * Numbers (THROTTLE_POLICY):
 *   account  5 free failures, then 1 s, 2 s, 4 s … capped at 5 min; forgets one failure per 30 min.
 *   address 20 free failures, then 1 s, 2 s, 4 s … capped at 15 min; forgets one failure per 5 min.
 * The account cap bounds how long a stranger can keep someone else out: at most 5 minutes after
 * their last guess, and while they keep guessing they get one guess per 5 minutes. Attempts
 * refused while a key is blocked are not counted, so hammering does not extend the block. The
 * address key is the client address (IPv6 by /64, see address.ts); the account key is a hash of
 * the normalised email, whether or not such an account exists, so the answers do not reveal
 * which emails have accounts.
 */
import { createHash } from 'node:crypto';
import { isUniqueViolation, type Db } from '../db';

export type ThrottleRule = {
  /** Failures allowed before any delay. */
  freeFailures: number;
  /** Delay after the first failure beyond the free ones. */
  baseDelayMs: number;
  /** The longest delay. */
  maxDelayMs: number;
  /** One counted failure is forgotten per this much time without failures. */
  decayMs: number;
};

export type ThrottlePolicy = { account: ThrottleRule; address: ThrottleRule };

export const THROTTLE_POLICY: ThrottlePolicy = {
  account: { freeFailures: 5, baseDelayMs: 1_000, maxDelayMs: 5 * 60_000, decayMs: 30 * 60_000 },
  address: { freeFailures: 20, baseDelayMs: 1_000, maxDelayMs: 15 * 60_000, decayMs: 5 * 60_000 },
};

/** delay(n) of the header comment, in milliseconds. */
export function backoffDelayMs(failures: number, rule: ThrottleRule): number {
  if (failures <= rule.freeFailures) return 0;
  const exponent = failures - rule.freeFailures - 1;
  // 2^40 ms is far beyond any cap; avoid overflow to Infinity for absurd counts.
  const raw = rule.baseDelayMs * 2 ** Math.min(exponent, 40);
  return Math.min(raw, rule.maxDelayMs);
}

/** Failures still counted at `now`, after the leak of one per `decayMs`. */
export function decayedFailures(failures: number, lastFailureAt: Date | null, now: Date, rule: ThrottleRule): number {
  if (!lastFailureAt || failures <= 0) return Math.max(0, failures);
  const elapsed = now.getTime() - lastFailureAt.getTime();
  if (elapsed <= 0) return failures;
  return Math.max(0, failures - Math.floor(elapsed / rule.decayMs));
}

export function accountKey(email: string): string {
  const normalised = email.trim().toLowerCase();
  return `account:${createHash('sha256').update(normalised).digest('hex').slice(0, 32)}`;
}

export function addressKey(address: string): string {
  return `address:${address}`;
}

export type Reservation = { ok: true; key: string; failures: number } | { ok: false; key: string; retryAfterMs: number };

/**
 * Counts one attempt against `key` unless the key is blocked at `now`. Safe under concurrency:
 * the update only applies if the row is still what was read (compare-and-set); on contention it
 * re-reads, and after a few lost races it refuses for a second rather than letting the attempt
 * through uncounted.
 */
export async function reserveAttempt(client: Db, key: string, rule: ThrottleRule, now: Date): Promise<Reservation> {
  for (let round = 0; round < 6; round += 1) {
    const row = await client.loginThrottle.findUnique({ where: { key } });
    if (!row) {
      const delay = backoffDelayMs(1, rule);
      try {
        await client.loginThrottle.create({
          data: { key, failures: 1, lastFailureAt: now, blockedUntil: delay > 0 ? new Date(now.getTime() + delay) : null },
        });
        return { ok: true, key, failures: 1 };
      } catch (error) {
        if (isUniqueViolation(error)) continue; // created by a parallel attempt; read it again
        throw error;
      }
    }
    if (row.blockedUntil && row.blockedUntil.getTime() > now.getTime()) {
      return { ok: false, key, retryAfterMs: row.blockedUntil.getTime() - now.getTime() };
    }
    const next = decayedFailures(row.failures, row.lastFailureAt, now, rule) + 1;
    const delay = backoffDelayMs(next, rule);
    const updated = await client.loginThrottle.updateMany({
      where: { key, failures: row.failures, lastFailureAt: row.lastFailureAt },
      data: { failures: next, lastFailureAt: now, blockedUntil: delay > 0 ? new Date(now.getTime() + delay) : null },
    });
    if (updated.count === 1) return { ok: true, key, failures: next };
  }
  return { ok: false, key, retryAfterMs: 1_000 };
}

/** After a successful sign-in: the account starts afresh. */
export async function clearKey(client: Db, key: string): Promise<void> {
  await client.loginThrottle.deleteMany({ where: { key } });
}

/**
 * After a successful sign-in: give back the address's reservation (the count only; a short
 * block it may have set stays, so a successful sign-in never shortens a running block).
 */
export async function releaseReservation(client: Db, key: string): Promise<void> {
  await client.loginThrottle.updateMany({ where: { key, failures: { gt: 0 } }, data: { failures: { decrement: 1 } } });
}

/** Seconds to show in a message, rounded up, at least 1. */
export function retryAfterSeconds(ms: number): number {
  return Math.max(1, Math.ceil(ms / 1000));
}
