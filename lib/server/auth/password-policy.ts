/**
 * Password policy for account creation (OWASP ASVS 5.0, section V6.2 "Password Security").
 *
 * - 6.2.1  at least 8 characters (LIMITS.passwordMin).
 * - 6.2.9  at least 64 characters allowed; we allow up to LIMITS.passwordMax (128) so that the
 *          Argon2id input stays bounded.
 * - 6.2.5  no composition rules — every character, spaces included, is accepted.
 * - 6.2.4  rejected when on a list of common passwords: the 49k-entry "passwords-common"
 *          dictionary of @zxcvbn-ts/language-common (MIT), shipped with the project.
 * - 6.2.11 rejected when it is one of the context-specific words documented in
 *          CONTEXT_WORDS (plus the person's own email address, its local part and their name).
 * - 6.2.8  no truncation, no case change. The one transformation is Unicode NFKC
 *          normalisation (NIST SP 800-63B §5.1.1.2 recommends normalising), applied identically
 *          when the password is set and when it is verified (see normalizePassword), so "ﬁ"
 *          and "fi" are the same password on every device.
 *
 * Length is counted in Unicode code points after normalisation, so an emoji counts as one.
 */
import { dictionary } from '@zxcvbn-ts/language-common';
import { LIMITS } from '../../domain';

/** Product and domain words that make easy guesses against this application (ASVS 6.1.2). */
export const CONTEXT_WORDS: readonly string[] = [
  'borderline',
  'harborlane',
  'harbor lane',
  'harbor lane support',
  'margin',
  'boundary',
  'classifier',
  'reviewer',
  'observer',
  'labelling',
  'labeling',
];

export const PASSWORD_MESSAGES = {
  tooShort: `Password must be at least ${LIMITS.passwordMin} characters long.`,
  tooLong: `Password must be at most ${LIMITS.passwordMax} characters long.`,
  common: 'This password is on a list of commonly used passwords. Choose one that is harder to guess.',
  context: 'Password must not be your email address, your name or a word tied to this application.',
  controlCharacters: 'Password must not contain control characters such as tabs or line breaks.',
} as const;

export type PasswordVerdict = { ok: true; password: string } | { ok: false; message: string };

let commonSet: Set<string> | null = null;
function commonPasswords(): Set<string> {
  if (!commonSet) commonSet = new Set(dictionary['passwords-common'].map((p) => p.toLowerCase()));
  return commonSet;
}

/** The one normalisation applied before hashing and before verifying. */
export function normalizePassword(raw: string): string {
  return raw.normalize('NFKC');
}

/** Length in code points (not UTF-16 units). */
export function passwordLength(normalized: string): number {
  let n = 0;
  for (const _ of normalized) n += 1;
  return n;
}

function squash(s: string): string {
  return s.toLowerCase().replace(/[\s._\-]+/g, '');
}

/**
 * Judges a new password. `context` holds the person's own details; an empty or missing
 * value is ignored. Returns the normalised password to hash when acceptable.
 */
export function checkNewPassword(raw: string, context: { email?: string; name?: string } = {}): PasswordVerdict {
  // Cheap bound before normalising, so a megabyte string is refused without work.
  if (raw.length > LIMITS.passwordMax * 4) return { ok: false, message: PASSWORD_MESSAGES.tooLong };
  const password = normalizePassword(raw);
  const length = passwordLength(password);
  if (length < LIMITS.passwordMin) return { ok: false, message: PASSWORD_MESSAGES.tooShort };
  if (length > LIMITS.passwordMax) return { ok: false, message: PASSWORD_MESSAGES.tooLong };
  // Spaces are fine (6.2.5); C0/C1 control characters only come from broken clients.
  if (/[\u0000-\u001f\u007f-\u009f]/.test(password)) return { ok: false, message: PASSWORD_MESSAGES.controlCharacters };

  const lower = password.toLowerCase();
  if (commonPasswords().has(lower)) return { ok: false, message: PASSWORD_MESSAGES.common };

  const squashed = squash(password);
  const words = new Set<string>(CONTEXT_WORDS.map(squash));
  const email = context.email?.trim().toLowerCase();
  if (email) {
    words.add(squash(email));
    const local = email.split('@')[0];
    if (local && local.length >= 3) words.add(squash(local));
  }
  const name = context.name?.trim();
  if (name && name.length >= 3) words.add(squash(name));
  // The word itself, or the word with only digits and punctuation around it ("Borderline2024!").
  const stripped = squashed.replace(/^[^\p{L}]+|[^\p{L}]+$/gu, '');
  for (const w of words) {
    if (w.length === 0) continue;
    if (squashed === w || stripped === w) return { ok: false, message: PASSWORD_MESSAGES.context };
  }
  return { ok: true, password };
}
