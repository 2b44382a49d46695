import type { Metadata } from 'next';
import Link from 'next/link';
import { InvitationAccept } from '@/components/InvitationAccept';
import { InvitationTokenSchema, ROLE_LABEL, ROLE_SUMMARY } from '@/lib/domain';
import { getSessionUser } from '@/lib/server/auth/session';
import { INVITATION_MESSAGES, inspectInvitation, type InvitationView } from '@/lib/server/dal/invitations';
import { db } from '@/lib/server/db';

// The link carries a secret: never send it onwards in a Referer header.
export const metadata: Metadata = { title: 'Invitation', referrer: 'no-referrer', robots: { index: false, follow: false } };
export const dynamic = 'force-dynamic';

function refusal(view: InvitationView): string {
  switch (view.state) {
    case 'expired':
      return INVITATION_MESSAGES.expired;
    case 'used':
      return INVITATION_MESSAGES.used;
    case 'revoked':
      return INVITATION_MESSAGES.revoked;
    default:
      return INVITATION_MESSAGES.unknown;
  }
}

export default async function InvitePage({ params }: { params: Promise<{ token: string }> }) {
  const { token } = await params;
  const parsed = InvitationTokenSchema.safeParse(token);
  const view: InvitationView = parsed.success ? await inspectInvitation(db(), parsed.data, new Date()) : { state: 'unknown' };
  if (view.state !== 'valid') {
    return (
      <div className="mx-auto max-w-md space-y-4">
        <h1 className="text-2xl font-semibold">This invitation cannot be used</h1>
        <p role="alert">{refusal(view)}</p>
        <Link href="/" className="font-medium text-oi-blue underline">
          Go to Borderline
        </Link>
      </div>
    );
  }
  const user = await getSessionUser();
  return (
    <div className="mx-auto max-w-md space-y-6">
      <div className="space-y-2">
        <h1 className="text-2xl font-semibold">Join {view.teamName}</h1>
        <p>
          You are invited as <strong>{ROLE_LABEL[view.role].toLowerCase()}</strong>: {ROLE_SUMMARY[view.role]}
        </p>
        <p className="text-sm text-slate-600">
          This link works once and is valid until{' '}
          {view.expiresAt.toLocaleString('en-GB', { dateStyle: 'medium', timeStyle: 'short', timeZone: 'UTC' })} UTC.
        </p>
      </div>
      <InvitationAccept
        token={parsed.success ? parsed.data : ''}
        teamName={view.teamName}
        role={view.role}
        signedInAs={user ? { name: user.name, email: user.email } : null}
      />
    </div>
  );
}
