'use client';

import { useRouter } from 'next/navigation';
import { useState } from 'react';
import { switchTeam } from '@/app/actions/switch-team';
import { ROLE_LABEL, type Role } from '@/lib/domain';
import { Notice, secondaryButtonClass } from './form-parts';

type Props = { teams: { teamId: string; name: string; role: Role }[]; currentTeamId: string };

/** The teams the signed-in person belongs to, with a button to work in another one. */
export function MyTeams({ teams, currentTeamId }: Props) {
  const router = useRouter();
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);

  async function choose(teamId: string) {
    setBusy(true);
    setError(null);
    try {
      const r = await switchTeam({ teamId });
      if (!r.ok) setError(r.error);
      else router.refresh();
    } catch {
      setError('Switching teams did not work just now. Try again in a moment.');
    } finally {
      setBusy(false);
    }
  }

  return (
    <div className="space-y-2">
      {error ? <Notice kind="problem">{error}</Notice> : null}
      <ul className="divide-y divide-slate-200 rounded border border-slate-300 bg-white">
        {teams.map((t) => (
          <li key={t.teamId} className="flex items-center justify-between gap-4 px-3 py-2 text-sm">
            <span>
              <span className="font-medium">{t.name}</span> <span className="text-slate-600">· {ROLE_LABEL[t.role]}</span>
            </span>
            {t.teamId === currentTeamId ? (
              <span className="font-semibold">
                <span aria-hidden="true">● </span>Current team
              </span>
            ) : (
              <button type="button" className={secondaryButtonClass} disabled={busy} onClick={() => choose(t.teamId)}>
                Switch to {t.name}
              </button>
            )}
          </li>
        ))}
      </ul>
    </div>
  );
}
