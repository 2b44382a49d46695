/**
 * Shared vocabulary and validation schemas (client and server).
 *
 * One zod schema per input shape: the server action validates with it, the form can use the
 * same limits for its `maxLength` attributes. Sections are grouped by area; add new areas
 * below the existing ones and keep each schema next to the limits it uses.
 *
 * Messages are written for the person at the keyboard: they name the field and the limit.
 */
import { z } from 'zod';

// ───────────────────────── results returned by server actions and route handlers ─────────

/**
 * HTTP-like statuses an action may answer with. 500 only for faults on our side; 503 when the
 * database is not answering (nothing was changed; the same request may be retried).
 */
export type ActionStatus = 400 | 401 | 403 | 404 | 409 | 413 | 429 | 500 | 503;

export type ActionFailure = {
  ok: false;
  status: ActionStatus;
  /** One human-readable sentence; never a stack trace or an internal message. */
  error: string;
  /** Per-field messages for forms (dotted path → message), when the input was invalid. */
  fields?: Record<string, string>;
  /** Set when the same request may simply be sent again later (status 503). */
  retryable?: true;
};

export type ActionResult<T> = { ok: true; data: T } | ActionFailure;

// ───────────────────────── roles ─────────────────────────

export const ROLES = ['lead', 'reviewer', 'observer'] as const;
export type Role = (typeof ROLES)[number];
export const RoleSchema = z.enum(ROLES, { error: 'Choose a role: lead, reviewer or observer.' });

/** Higher rank includes the rights of lower ranks (a lead may also vote, anyone may read). */
export const ROLE_RANK: Readonly<Record<Role, number>> = { observer: 0, reviewer: 1, lead: 2 };

export const ROLE_LABEL: Readonly<Record<Role, string>> = {
  lead: 'Lead',
  reviewer: 'Reviewer',
  observer: 'Observer',
};

export const ROLE_SUMMARY: Readonly<Record<Role, string>> = {
  lead: 'Manages the team and projects, imports and exports, breaks ties.',
  reviewer: 'Votes on queued samples.',
  observer: 'Reads everything, changes nothing.',
};

export function roleAtLeast(role: Role, minimum: Role): boolean {
  return ROLE_RANK[role] >= ROLE_RANK[minimum];
}

export function isRole(value: string): value is Role {
  return (ROLES as readonly string[]).includes(value);
}

// ───────────────────────── field limits ─────────────────────────

export const LIMITS = {
  /** Database ids (cuid) and similar opaque keys. */
  id: 64,
  /** RFC 5321 path limit. */
  email: 254,
  personName: 80,
  teamName: 80,
  invitationLabel: 80,
  /** Password policy (see lib/server/auth/password-policy.ts): characters after NFKC. */
  passwordMin: 8,
  passwordMax: 128,
  /** Wire limit for a password field before the policy looks at it. */
  passwordWire: 1024,
  /** Invitation secret in the link: 32 random bytes, base64url = 43 characters. */
  invitationToken: 128,
} as const;

/** Messages for values over a length cap; the wrapper answers these with 413. */
export function tooLong(field: string, max: number): string {
  return `${field} is too long (at most ${max} characters).`;
}

// ───────────────────────── primitives ─────────────────────────

export const IdSchema = z
  .string({ error: 'An id is required.' })
  .min(1, { error: 'An id is required.' })
  .max(LIMITS.id, { error: tooLong('Id', LIMITS.id) })
  .regex(/^[A-Za-z0-9_-]+$/, { error: 'That id is not valid.' });

/** Trimmed and lower-cased so that one address is one account. */
export const EmailSchema = z
  .string({ error: 'Enter your email address.' })
  .max(LIMITS.email, { error: tooLong('Email address', LIMITS.email) })
  .trim()
  .toLowerCase()
  .pipe(z.email({ error: 'Enter a valid email address, like name@example.org.' }));

function displayName(field: string, max: number) {
  return z
    .string({ error: `${field} is required.` })
    .max(max * 4, { error: tooLong(field, max) })
    .transform((s) => s.normalize('NFC').replace(/\s+/g, ' ').trim())
    .pipe(
      z
        .string()
        .min(1, { error: `${field} is required.` })
        .max(max, { error: tooLong(field, max) })
        .refine((s) => !/[\u0000-\u001f\u007f]/.test(s), { error: `${field} contains control characters.` }),
    );
}

export const PersonNameSchema = displayName('Name', LIMITS.personName);
export const TeamNameSchema = displayName('Team name', LIMITS.teamName);

/** Raw password as typed; the policy (server side) normalises and judges it. */
export const PasswordFieldSchema = z
  .string({ error: 'Enter a password.' })
  .min(1, { error: 'Enter a password.' })
  .max(LIMITS.passwordWire, { error: `Password must be at most ${LIMITS.passwordMax} characters long.` });

export const InvitationTokenSchema = z
  .string({ error: 'The invitation link is incomplete.' })
  .min(16, { error: 'The invitation link is incomplete.' })
  .max(LIMITS.invitationToken, { error: 'The invitation link is not valid.' })
  .regex(/^[A-Za-z0-9_-]+$/, { error: 'The invitation link is not valid.' });

// ───────────────────────── accounts and teams ─────────────────────────

export const SignInInput = z.object({
  email: EmailSchema,
  password: PasswordFieldSchema,
});
export type SignInInput = z.infer<typeof SignInInput>;

/** First run of a fresh install: the first account, its team, lead role. */
export const SetupInput = z.object({
  teamName: TeamNameSchema,
  name: PersonNameSchema,
  email: EmailSchema,
  password: PasswordFieldSchema,
});
export type SetupInput = z.infer<typeof SetupInput>;

/** New account created from an invitation link (joins the inviting team). */
export const SignUpInput = z.object({
  token: InvitationTokenSchema,
  name: PersonNameSchema,
  email: EmailSchema,
  password: PasswordFieldSchema,
});
export type SignUpInput = z.infer<typeof SignUpInput>;

export const CreateTeamInput = z.object({ name: TeamNameSchema });
export type CreateTeamInput = z.infer<typeof CreateTeamInput>;

export const SwitchTeamInput = z.object({ teamId: IdSchema });
export type SwitchTeamInput = z.infer<typeof SwitchTeamInput>;

/** Lifetimes a lead may choose for an invitation link, in hours. */
export const INVITATION_LIFETIMES_HOURS = [24, 72, 168] as const;
export const DEFAULT_INVITATION_LIFETIME_HOURS = 72;

export const CreateInvitationInput = z.object({
  teamId: IdSchema,
  role: RoleSchema,
  expiresInHours: z
    .literal(INVITATION_LIFETIMES_HOURS, { error: 'Choose how long the link stays valid: 1, 3 or 7 days.' })
    .default(DEFAULT_INVITATION_LIFETIME_HOURS),
  label: z
    .string()
    .max(LIMITS.invitationLabel * 4, { error: tooLong('Note', LIMITS.invitationLabel) })
    .transform((s) => s.normalize('NFC').replace(/\s+/g, ' ').trim())
    .pipe(z.string().max(LIMITS.invitationLabel, { error: tooLong('Note', LIMITS.invitationLabel) }))
    .optional(),
});
export type CreateInvitationInput = z.infer<typeof CreateInvitationInput>;

export const RevokeInvitationInput = z.object({ invitationId: IdSchema });
export type RevokeInvitationInput = z.infer<typeof RevokeInvitationInput>;

/** A signed-in user accepts an invitation with their existing account. */
export const AcceptInvitationInput = z.object({ token: InvitationTokenSchema });
export type AcceptInvitationInput = z.infer<typeof AcceptInvitationInput>;

export const ChangeRoleInput = z.object({ membershipId: IdSchema, role: RoleSchema });
export type ChangeRoleInput = z.infer<typeof ChangeRoleInput>;

export const RemoveMemberInput = z.object({ membershipId: IdSchema });
export type RemoveMemberInput = z.infer<typeof RemoveMemberInput>;

/** Shown under every new-password field. */
export const PASSWORD_HINT = `At least ${LIMITS.passwordMin} characters (up to ${LIMITS.passwordMax}). Any characters, spaces included; a few words strung together work well. Common passwords are refused.`;

/** Sign-in answers, shared by the server (lib/server/auth/sign-in.ts) and the sign-in form. */
export const SIGN_IN_MESSAGES = {
  /** next-auth passes a thrown message to the client as `error`: `${throttledPrefix}${seconds}`. */
  throttledPrefix: 'throttled:',
  invalid: 'That email and password do not match an account. Check both and try again.',
  throttled: (seconds: number) =>
    `Too many sign-in attempts. Wait ${seconds} second${seconds === 1 ? '' : 's'} and try again.`,
  missing: 'Enter your email address and your password.',
  failed: 'Signing in did not work just now. Try again in a moment.',
} as const;

/** The message for next-auth's client-side `error` value. */
export function signInErrorMessage(error: string | null | undefined): string {
  if (!error) return SIGN_IN_MESSAGES.failed;
  if (error === 'CredentialsSignin') return SIGN_IN_MESSAGES.invalid;
  if (error.startsWith(SIGN_IN_MESSAGES.throttledPrefix)) {
    const seconds = Number(error.slice(SIGN_IN_MESSAGES.throttledPrefix.length));
    if (Number.isFinite(seconds) && seconds > 0) return SIGN_IN_MESSAGES.throttled(Math.ceil(seconds));
  }
  return SIGN_IN_MESSAGES.failed;
}

// ───────────────────────── audit log vocabulary ─────────────────────────

export const AUDIT_ACTIONS = [
  'auth.sign-in',
  'auth.sign-in-failed',
  'auth.sign-out',
  'auth.account-created',
  'team.created',
  'member.added',
  'member.role-changed',
  'member.removed',
  'invitation.created',
  'invitation.revoked',
  'invitation.accepted',
  // Data area (imports, pipeline tokens): lib/server/import, lib/server/tokens.ts
  'import.applied',
  'import.failed',
  'token.created',
  'token.revoked',
] as const;
export type AuditAction = (typeof AUDIT_ACTIONS)[number];
