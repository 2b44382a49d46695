/**
 * Credentials check behind next-auth's `authorize`: throttling, password verification with a
 * constant amount of hashing work whether or not the account exists, audit of every outcome,
 * and an upgrade of old password hashes on success.
 */
import { SIGN_IN_MESSAGES, SignInInput } from '../../domain';
import type { Db } from '../db';
import { hashPassword, needsRehash, verifyPassword } from '../password';
import { recordAudit } from './audit';
import { normalizePassword } from './password-policy';
import {
  accountKey,
  addressKey,
  clearKey,
  releaseReservation,
  reserveAttempt,
  retryAfterSeconds,
  THROTTLE_POLICY,
  type ThrottlePolicy,
} from './throttle';

/** Messages live in lib/domain.ts (shared with the sign-in form). */
export const SIGN_IN_ERRORS = SIGN_IN_MESSAGES;

export type SignInOutcome =
  | { ok: true; userId: string }
  | { ok: false; reason: 'invalid' }
  | { ok: false; reason: 'throttled'; retryAfterSeconds: number };

let dummyHash: Promise<string> | null = null;
/** A real Argon2id hash to verify against when the account does not exist (equal timing). */
function dummy(): Promise<string> {
  if (!dummyHash) dummyHash = hashPassword('no account has this password: 7f3c1e9a');
  return dummyHash;
}

export async function authenticateCredentials(
  client: Db,
  credentials: Record<string, unknown>,
  meta: { address: string; now: Date; policy?: ThrottlePolicy },
): Promise<SignInOutcome> {
  const policy = meta.policy ?? THROTTLE_POLICY;
  const parsed = SignInInput.safeParse({ email: credentials.email, password: credentials.password });

  const address = await reserveAttempt(client, addressKey(meta.address), policy.address, meta.now);
  if (!address.ok) {
    await recordAudit(client, {
      action: 'auth.sign-in-failed',
      address: meta.address,
      detail: { reason: 'throttled-address', retryAfterSeconds: retryAfterSeconds(address.retryAfterMs) },
    });
    return { ok: false, reason: 'throttled', retryAfterSeconds: retryAfterSeconds(address.retryAfterMs) };
  }
  if (!parsed.success) {
    await recordAudit(client, { action: 'auth.sign-in-failed', address: meta.address, detail: { reason: 'malformed' } });
    return { ok: false, reason: 'invalid' };
  }
  const { email, password } = parsed.data;

  const account = await reserveAttempt(client, accountKey(email), policy.account, meta.now);
  const user = await client.user.findUnique({ where: { email }, select: { id: true, passwordHash: true } });
  if (!account.ok) {
    await recordAudit(client, {
      action: 'auth.sign-in-failed',
      userId: user?.id ?? null,
      address: meta.address,
      detail: { reason: 'throttled-account', retryAfterSeconds: retryAfterSeconds(account.retryAfterMs) },
    });
    return { ok: false, reason: 'throttled', retryAfterSeconds: retryAfterSeconds(account.retryAfterMs) };
  }

  const normalized = normalizePassword(password);
  const matches = user ? await verifyPassword(user.passwordHash, normalized) : (await verifyPassword(await dummy(), normalized), false);
  if (!user || !matches) {
    // Unknown accounts are logged without the typed email (it may be a mistyped password).
    await recordAudit(client, {
      action: 'auth.sign-in-failed',
      userId: user?.id ?? null,
      address: meta.address,
      detail: { reason: user ? 'wrong-password' : 'unknown-account', failures: account.failures },
    });
    return { ok: false, reason: 'invalid' };
  }

  await clearKey(client, account.key);
  await releaseReservation(client, address.key);
  if (needsRehash(user.passwordHash)) {
    await client.user.update({ where: { id: user.id }, data: { passwordHash: await hashPassword(normalized) } });
  }
  await recordAudit(client, { action: 'auth.sign-in', userId: user.id, address: meta.address });
  return { ok: true, userId: user.id };
}
