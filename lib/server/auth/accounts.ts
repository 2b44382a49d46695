/**
 * Account creation: the first account of a fresh install (with its team), and accounts created
 * from an invitation link. Both apply the password policy, hash with Argon2id, and do all their
 * writes in one transaction with the audit records.
 */
import { type Role } from '../../domain';
import { ActionError, conflict } from '../authz/errors';
import { consumeInvitation, inspectInvitation, invitationRefusal } from '../dal/invitations';
import { createTeamWithLead } from '../dal/teams';
import type { Db } from '../db';
import { hashPassword } from '../password';
import { recordAudit } from './audit';
import { checkNewPassword } from './password-policy';

export const ACCOUNT_MESSAGES = {
  alreadySetUp: 'This installation is already set up. Sign in, or ask a team lead for an invitation link.',
  emailTaken: 'An account with this email address already exists. Sign in with it to accept the invitation.',
} as const;

/** True until the first account exists. */
export async function isFreshInstall(client: Db): Promise<boolean> {
  return (await client.user.count()) === 0;
}

function policyOrThrow(password: string, context: { email: string; name: string }): string {
  const verdict = checkNewPassword(password, context);
  if (!verdict.ok) throw new ActionError(400, verdict.message, { password: verdict.message });
  return verdict.password;
}

export async function createFirstAccount(
  client: Db,
  input: { teamName: string; name: string; email: string; password: string },
  meta: { address: string | null },
): Promise<{ userId: string; teamId: string }> {
  // Cheap refusal before any hashing work.
  if (!(await isFreshInstall(client))) throw conflict(ACCOUNT_MESSAGES.alreadySetUp);
  const password = policyOrThrow(input.password, input);
  const passwordHash = await hashPassword(password);
  return client.$transaction(
    async (tx) => {
      // Re-checked inside the (serializable) transaction: two set-ups racing cannot both win.
      if ((await tx.user.count()) !== 0) throw conflict(ACCOUNT_MESSAGES.alreadySetUp);
      const user = await tx.user.create({ data: { email: input.email, name: input.name, passwordHash } });
      await recordAudit(tx, {
        action: 'auth.account-created',
        userId: user.id,
        targetType: 'user',
        targetId: user.id,
        detail: { via: 'setup' },
        address: meta.address,
      });
      const { teamId } = await createTeamWithLead(tx, { name: input.teamName, userId: user.id, address: meta.address });
      return { userId: user.id, teamId };
    },
    { isolationLevel: 'Serializable' },
  );
}

export async function createAccountFromInvitation(
  client: Db,
  input: { token: string; name: string; email: string; password: string },
  meta: { address: string | null; now: Date },
): Promise<{ userId: string; email: string; teamId: string; teamName: string; role: Role }> {
  // Refuse unusable links before any hashing work.
  const view = await inspectInvitation(client, input.token, meta.now);
  if (view.state !== 'valid') throw invitationRefusal(view);
  const password = policyOrThrow(input.password, input);
  if (await client.user.findUnique({ where: { email: input.email }, select: { id: true } })) {
    throw new ActionError(409, ACCOUNT_MESSAGES.emailTaken, { email: ACCOUNT_MESSAGES.emailTaken });
  }
  const passwordHash = await hashPassword(password);
  return client.$transaction(async (tx) => {
    const user = await tx.user.create({ data: { email: input.email, name: input.name, passwordHash } });
    await recordAudit(tx, {
      action: 'auth.account-created',
      userId: user.id,
      targetType: 'user',
      targetId: user.id,
      detail: { via: 'invitation' },
      address: meta.address,
    });
    const joined = await consumeInvitation(tx, { token: input.token, userId: user.id, address: meta.address, now: meta.now });
    return { userId: user.id, email: input.email, teamId: joined.teamId, teamName: joined.teamName, role: joined.role };
  });
}
