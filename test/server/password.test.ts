// Argon2id password hashing at OWASP's recommended minimum (m = 19456 KiB, t = 2, p = 1).

import { describe, expect, it } from 'vitest';
import { ARGON2_PARAMS, hashPassword, MAX_PASSWORD_LENGTH, needsRehash, verifyPassword } from '@/lib/server/password';

// Reference vectors of the Argon2 reference implementation (phc-winner-argon2, src/test.c,
// Argon2id, version 0x13, password "password" / "differentpassword", salt "somesalt").
const REF_65536 = '$argon2id$v=19$m=65536,t=2,p=1$c29tZXNhbHQ$CTFhFdXPJO1aFaMaO6Mm5c8y7cJHAph8ArZWb2GRPPc';
const REF_256 = '$argon2id$v=19$m=256,t=2,p=1$c29tZXNhbHQ$nf65EOgLrQMR/uIPnA4rEsF5h7TKyQwu9U1bMCHGi/4';
const REF_DIFFERENT = '$argon2id$v=19$m=65536,t=2,p=1$c29tZXNhbHQ$C4TWUs9rDEvq7w3+J4umqA32aWKB1+DSiRuBfYxFj94';

describe('password hashing', () => {
  it('produces Argon2id PHC strings with m=19456, t=2, p=1, a 16-byte salt and a 32-byte hash', async () => {
    // Source of the parameters: OWASP Password Storage Cheat Sheet (Argon2id minimum configuration).
    expect(ARGON2_PARAMS).toMatchObject({ memoryCost: 19456, timeCost: 2, parallelism: 1 });
    const hash = await hashPassword('a long passphrase of my own');
    // PHC string format: base64 without padding, 16 bytes → 22 characters, 32 bytes → 43.
    expect(hash).toMatch(/^\$argon2id\$v=19\$m=19456,t=2,p=1\$[A-Za-z0-9+/]{22}\$[A-Za-z0-9+/]{43}$/);
    expect(hash).not.toContain('passphrase');
  });

  it('salts each hash and verifies only the right password', async () => {
    const a = await hashPassword('correct horse battery staple');
    const b = await hashPassword('correct horse battery staple');
    expect(a).not.toBe(b);
    expect(await verifyPassword(a, 'correct horse battery staple')).toBe(true);
    expect(await verifyPassword(b, 'correct horse battery staple')).toBe(true);
    expect(await verifyPassword(a, 'correct horse battery stapl')).toBe(false);
    expect(await verifyPassword(a, 'Correct horse battery staple')).toBe(false);
  });

  it('verifies the reference implementation\'s own hashes', async () => {
    expect(await verifyPassword(REF_256, 'password')).toBe(true);
    expect(await verifyPassword(REF_65536, 'password')).toBe(true);
    expect(await verifyPassword(REF_65536, 'differentpassword')).toBe(false);
    expect(await verifyPassword(REF_DIFFERENT, 'differentpassword')).toBe(true);
  });

  it('answers false (never throws) for malformed hashes and over-long passwords', async () => {
    expect(await verifyPassword('not a hash', 'password')).toBe(false);
    expect(await verifyPassword('', 'password')).toBe(false);
    const long = 'x'.repeat(MAX_PASSWORD_LENGTH + 1);
    expect(await verifyPassword(REF_256, long)).toBe(false);
    await expect(hashPassword(long)).rejects.toThrow(RangeError);
  });

  it('asks for a rehash when a stored hash is weaker than the policy', async () => {
    expect(needsRehash(REF_256)).toBe(true); // m=256 < 19456
    expect(needsRehash(REF_65536)).toBe(false); // stronger memory, same t and p
    expect(needsRehash(await hashPassword('fresh password here'))).toBe(false);
    expect(needsRehash('$2b$12$abcdefghijklmnopqrstuuABCDEFGHIJKLMNOPQRSTUVWXYZ01234')).toBe(true); // bcrypt
    expect(needsRehash('garbage')).toBe(true);
  });
});
