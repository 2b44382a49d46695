import type { Metadata } from 'next';
import { CreateTeamForm } from '@/components/CreateTeamForm';
import { MyTeams } from '@/components/MyTeams';
import { SignOutButton } from '@/components/SignOutButton';
import { TeamInvitations } from '@/components/TeamInvitations';
import { TeamMembers } from '@/components/TeamMembers';
import { ROLE_LABEL } from '@/lib/domain';
import { requireUserForPage } from '@/lib/server/authz/page';
import { listPendingInvitations } from '@/lib/server/dal/invitations';
import { listMembers } from '@/lib/server/dal/members';
import { currentTeamOf } from '@/lib/server/dal/teams';

export const metadata: Metadata = { title: 'Team' };
export const dynamic = 'force-dynamic';

const dateLabel = (d: Date) => `${d.toLocaleString('en-GB', { dateStyle: 'medium', timeStyle: 'short', timeZone: 'UTC' })} UTC`;

/** The Team screen: members and roles, pending invitations; changes for leads only. */
export default async function TeamPage() {
  const user = await requireUserForPage('/team');
  const current = await currentTeamOf({ userId: user.id, lastTeamId: user.lastTeamId });
  if (!current) {
    return (
      <div className="mx-auto max-w-xl space-y-6">
        <h1 className="text-2xl font-semibold">Team</h1>
        <p>You are not a member of any team. Ask a lead for an invitation link, or start a team of your own.</p>
        <section id="new-team" className="rounded border border-slate-300 bg-white p-4">
          <CreateTeamForm />
        </section>
      </div>
    );
  }
  const { team, scope } = current;
  const isLead = team.role === 'lead';
  const [members, pending] = await Promise.all([listMembers(scope), listPendingInvitations(scope, new Date())]);
  return (
    <div className="space-y-8">
      <div className="space-y-1">
        <h1 className="text-2xl font-semibold">Team: {team.name}</h1>
        <p className="text-slate-600">
          Your role: <strong className="text-ink">{ROLE_LABEL[team.role]}</strong>.{' '}
          {isLead ? 'You can invite people, change roles and remove members.' : 'Only a lead can change the team.'}
        </p>
      </div>

      <section aria-labelledby="members-heading" className="space-y-3">
        <h2 id="members-heading" className="text-lg font-semibold">
          Members ({members.length})
        </h2>
        <TeamMembers
          teamName={team.name}
          canManage={isLead}
          currentUserId={user.id}
          members={members.map((m) => ({ ...m, joinedAt: m.joinedAt.toISOString() }))}
        />
      </section>

      <section aria-labelledby="invitations-heading" className="space-y-3">
        <h2 id="invitations-heading" className="text-lg font-semibold">
          Invitations
        </h2>
        <TeamInvitations
          teamId={team.teamId}
          teamName={team.name}
          canManage={isLead}
          pending={pending.map((p) => ({
            id: p.id,
            role: p.role,
            label: p.label,
            expiresLabel: dateLabel(p.expiresAt),
            createdByName: p.createdByName,
          }))}
        />
      </section>

      <section aria-labelledby="my-teams-heading" className="max-w-xl space-y-3">
        <h2 id="my-teams-heading" className="text-lg font-semibold">
          Your teams
        </h2>
        <MyTeams
          teams={current.all.map((t) => ({ teamId: t.teamId, name: t.name, role: t.role }))}
          currentTeamId={team.teamId}
        />
      </section>

      <section id="new-team" className="max-w-xl rounded border border-slate-300 bg-white p-4">
        <CreateTeamForm />
      </section>

      <section aria-labelledby="account-heading" className="max-w-xl space-y-2">
        <h2 id="account-heading" className="text-lg font-semibold">
          Your account
        </h2>
        <p className="text-sm">
          Signed in as <strong>{user.name}</strong> ({user.email}). Sessions end by themselves after a working day.
        </p>
        <SignOutButton />
      </section>
    </div>
  );
}
