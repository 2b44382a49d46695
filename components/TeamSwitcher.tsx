import Link from 'next/link';
import { getSessionUser } from '@/lib/server/auth/session';
import { currentTeamOf } from '@/lib/server/dal/teams';
import { TeamSwitcherMenu } from './TeamSwitcherMenu';

/**
 * Session-aware corner of the header (server component): the current team with a menu to switch
 * teams, start one, or sign out; a sign-in link when signed out. Place it in the header; if the
 * header is a client component, pass it in as a child.
 */
export async function TeamSwitcher() {
  const user = await getSessionUser();
  if (!user) {
    return (
      <Link href="/signin" className="text-sm font-medium text-oi-blue underline">
        Sign in
      </Link>
    );
  }
  const current = await currentTeamOf({ userId: user.id, lastTeamId: user.lastTeamId });
  return (
    <TeamSwitcherMenu
      userName={user.name}
      teams={(current?.all ?? []).map((t) => ({ teamId: t.teamId, name: t.name, role: t.role }))}
      currentTeamId={current?.team.teamId ?? null}
    />
  );
}
