// Password hashing: Argon2id via @node-rs/argon2.
//
// Parameters: OWASP Password Storage Cheat Sheet, "Argon2id" section — minimum configuration
// m = 19456 KiB (19 MiB), t = 2 iterations, p = 1 degree of parallelism
// (https://cheatsheetseries.owasp.org/cheatsheets/Password_Storage_Cheat_Sheet.html).
// Hashes are PHC strings ($argon2id$v=19$m=…,t=…,p=…$salt$hash) with a random 16-byte salt, so
// the parameters travel with each hash; `needsRehash` tells the sign-in code when to upgrade.

import { hash, parseOptions, verify } from '@node-rs/argon2';

/** @node-rs/argon2's `Algorithm.Argon2id` (a const enum, which isolatedModules cannot import). */
const ARGON2ID = 2;

export const ARGON2_PARAMS = {
  algorithm: ARGON2ID,
  /** KiB */
  memoryCost: 19456,
  timeCost: 2,
  parallelism: 1,
  /** bytes of raw hash output */
  outputLen: 32,
} as const;

/** Longest accepted password, in characters (bounds hashing work for hostile input). */
export const MAX_PASSWORD_LENGTH = 256;

export async function hashPassword(password: string): Promise<string> {
  if (password.length > MAX_PASSWORD_LENGTH) {
    throw new RangeError(`password longer than ${MAX_PASSWORD_LENGTH} characters`);
  }
  return hash(password, ARGON2_PARAMS);
}

/**
 * True when `password` matches the stored PHC string. Never throws for a malformed stored hash
 * or an over-long password; returns false instead.
 */
export async function verifyPassword(storedHash: string, password: string): Promise<boolean> {
  if (password.length > MAX_PASSWORD_LENGTH) return false;
  try {
    return await verify(storedHash, password);
  } catch {
    return false;
  }
}

/** True when a stored hash uses weaker parameters (or another variant) than ARGON2_PARAMS. */
export function needsRehash(storedHash: string): boolean {
  try {
    const o = parseOptions(storedHash);
    return (
      o.algorithm !== ARGON2_PARAMS.algorithm ||
      o.memoryCost < ARGON2_PARAMS.memoryCost ||
      o.timeCost < ARGON2_PARAMS.timeCost ||
      o.parallelism < ARGON2_PARAMS.parallelism ||
      o.outputLen < ARGON2_PARAMS.outputLen
    );
  } catch {
    return true;
  }
}
