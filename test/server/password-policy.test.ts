/**
 * Password policy against OWASP ASVS 5.0 section V6.2 "Password Security".
 * Requirement texts (reference: OWASP/ASVS repository, 5.0/en/0x15-V6-Authentication.md):
 *   6.2.1  "user set passwords are at least 8 characters in length"
 *   6.2.4  "checked against an available set of, at least, the top 3000 passwords which match
 *          the application's password policy, e.g. minimum length"
 *   6.2.5  "passwords of any composition can be used, without rules limiting the type of
 *          characters permitted"
 *   6.2.8  "verifies the user's password exactly as received … without any modifications such
 *          as truncation or case transformation"
 *   6.2.9  "passwords of at least 64 characters are permitted"
 *   6.2.11 "the documented list of context specific words is used to prevent easy to guess
 *          passwords being created"
 */
import { describe, expect, it } from 'vitest';
import { dictionary } from '@zxcvbn-ts/language-common';
import fc from 'fast-check';
import { checkNewPassword, CONTEXT_WORDS, normalizePassword, PASSWORD_MESSAGES } from '@/lib/server/auth/password-policy';

// The exact wording users see. Written out here (not imported) so a change of wording is a
// deliberate change of this test too.
const TOO_SHORT = 'Password must be at least 8 characters long.';
const TOO_LONG = 'Password must be at most 128 characters long.';
const COMMON = 'This password is on a list of commonly used passwords. Choose one that is harder to guess.';
const CONTEXT = 'Password must not be your email address, your name or a word tied to this application.';

describe('password policy (ASVS 5.0 V6.2)', () => {
  it('shows the exact messages', () => {
    expect(PASSWORD_MESSAGES.tooShort).toBe(TOO_SHORT);
    expect(PASSWORD_MESSAGES.tooLong).toBe(TOO_LONG);
    expect(PASSWORD_MESSAGES.common).toBe(COMMON);
    expect(PASSWORD_MESSAGES.context).toBe(CONTEXT);
  });

  it('6.2.1: refuses 7 characters, accepts 8 (hand-counted: "tq8#vPz" has 7, "tq8#vPzL" has 8)', () => {
    expect(checkNewPassword('tq8#vPz')).toEqual({ ok: false, message: TOO_SHORT });
    expect(checkNewPassword('tq8#vPzL')).toEqual({ ok: true, password: 'tq8#vPzL' });
  });

  it('6.2.1: counts characters, not UTF-16 units (4 emoji = 8 UTF-16 units but 4 characters)', () => {
    const four = '\u{1F99C}\u{1F30A}\u{1F9ED}\u{1F3D4}'; // 4 astral code points, .length === 8
    expect(four.length).toBe(8);
    expect(checkNewPassword(four)).toEqual({ ok: false, message: TOO_SHORT });
    expect(checkNewPassword(four + four).ok).toBe(true);
  });

  it('6.2.9: accepts 64 and 128 characters, refuses 129', () => {
    const unit = 'gk3vq7wz'; // 8 characters, not a list entry
    expect(checkNewPassword(unit.repeat(8)).ok).toBe(true); // 64
    expect(checkNewPassword(unit.repeat(16)).ok).toBe(true); // 128
    expect(checkNewPassword(unit.repeat(16) + 'x')).toEqual({ ok: false, message: TOO_LONG });
    // A megabyte is refused with the same message (and without normalising it first).
    expect(checkNewPassword('a'.repeat(1_000_000))).toEqual({ ok: false, message: TOO_LONG });
  });

  it('6.2.5: no composition rules — lower-case only, digits only, spaces and any script are fine', () => {
    for (const p of ['quietlantern', '80417395266', 'four words of moss', 'тихийфонарь', '静かな提灯と潮風の音']) {
      expect(checkNewPassword(p), p).toEqual({ ok: true, password: p.normalize('NFKC') });
    }
  });

  it('6.2.4: every list entry of policy length among the first 3000 is refused, in any letter case', () => {
    // reference: @zxcvbn-ts/language-common 4.1.3, dictionary["passwords-common"], ordered by
    // frequency; read here independently of the policy module.
    const top = dictionary['passwords-common'].slice(0, 3000).filter((p) => [...p].length >= 8);
    expect(top.length).toBeGreaterThan(500);
    for (const p of top) {
      expect(checkNewPassword(p), p).toEqual({ ok: false, message: COMMON });
      expect(checkNewPassword(p.toUpperCase()), p).toEqual({ ok: false, message: COMMON });
    }
    // Well-known entries (textbook fact: these head every published common-password list).
    for (const p of ['password', '12345678', 'qwertyuiop', 'iloveyou', 'Password']) {
      expect(checkNewPassword(p), p).toEqual({ ok: false, message: COMMON });
    }
  });

  it('6.2.4: the whole shipped list is used, not only the head (entry 45005 "letmein123")', () => {
    const list = dictionary['passwords-common'];
    expect(list.indexOf('letmein123')).toBeGreaterThan(40000);
    expect(checkNewPassword('letmein123')).toEqual({ ok: false, message: COMMON });
  });

  it('6.2.11: refuses the documented context words, own email, local part and name', () => {
    expect(CONTEXT_WORDS).toContain('borderline');
    expect(checkNewPassword('Borderline')).toEqual({ ok: false, message: CONTEXT });
    expect(checkNewPassword('borderline2026!')).toEqual({ ok: false, message: CONTEXT });
    expect(checkNewPassword('Harbor Lane Support')).toEqual({ ok: false, message: CONTEXT });
    const ctx = { email: 'maren.okafor@example.org', name: 'Maren Okafor' };
    expect(checkNewPassword('maren.okafor@example.org', ctx)).toEqual({ ok: false, message: CONTEXT });
    expect(checkNewPassword('MarenOkafor', ctx)).toEqual({ ok: false, message: CONTEXT });
    expect(checkNewPassword('maren.okafor99', ctx)).toEqual({ ok: false, message: CONTEXT });
    // A longer phrase that merely contains the name is allowed.
    expect(checkNewPassword('maren sails past the lighthouse', ctx).ok).toBe(true);
  });

  it('6.2.8: no truncation or case change; NFKC is the only transformation, identical on set and verify', () => {
    // "ﬁ" (U+FB01, compatibility ligature) normalises to "fi" under NFKC (Unicode UAX #15).
    expect(normalizePassword('\uFB01shing-pier-77')).toBe('fishing-pier-77');
    const r = checkNewPassword('\uFB01shing-pier-77');
    expect(r).toEqual({ ok: true, password: 'fishing-pier-77' });
    // Case is preserved exactly.
    expect(checkNewPassword('MixedCase-Ledger-4')).toEqual({ ok: true, password: 'MixedCase-Ledger-4' });
  });

  it('refuses control characters with a clear message', () => {
    expect(checkNewPassword('tab\there-is-bad')).toEqual({ ok: false, message: PASSWORD_MESSAGES.controlCharacters });
  });

  it('property: every accepted password has 8..128 characters and is returned NFKC-normalised', () => {
    fc.assert(
      fc.property(fc.string({ unit: 'grapheme', minLength: 0, maxLength: 140 }), (s) => {
        const r = checkNewPassword(s);
        if (r.ok) {
          const n = [...r.password].length;
          expect(n).toBeGreaterThanOrEqual(8);
          expect(n).toBeLessThanOrEqual(128);
          expect(r.password).toBe(s.normalize('NFKC'));
        } else {
          expect(r.message.length).toBeGreaterThan(10);
        }
      }),
      { numRuns: 300, seed: 20260 },
    );
  });
});
