'use client';

import Link from 'next/link';
import { usePathname, useRouter } from 'next/navigation';
import { useEffect, useId, useRef, useState } from 'react';
import { switchTeam } from '@/app/actions/switch-team';
import { ROLE_LABEL, type Role } from '@/lib/domain';
import { Notice } from './form-parts';
import { SignOutButton } from './SignOutButton';

export type SwitcherTeam = { teamId: string; name: string; role: Role };

type Props = { userName: string; teams: SwitcherTeam[]; currentTeamId: string | null };

/** Disclosure menu: the current team, the other teams to switch to, a new team, sign out. */
export function TeamSwitcherMenu({ userName, teams, currentTeamId }: Props) {
  const router = useRouter();
  const pathname = usePathname();
  const [open, setOpen] = useState(false);
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  const panelId = useId();
  const buttonRef = useRef<HTMLButtonElement>(null);
  const panelRef = useRef<HTMLDivElement>(null);
  const current = teams.find((t) => t.teamId === currentTeamId) ?? null;

  useEffect(() => {
    if (!open) return;
    const onKey = (e: KeyboardEvent) => {
      if (e.key === 'Escape') {
        setOpen(false);
        buttonRef.current?.focus();
      }
    };
    const onClick = (e: MouseEvent) => {
      const t = e.target;
      if (t instanceof Node && !panelRef.current?.contains(t) && !buttonRef.current?.contains(t)) setOpen(false);
    };
    document.addEventListener('keydown', onKey);
    document.addEventListener('mousedown', onClick);
    return () => {
      document.removeEventListener('keydown', onKey);
      document.removeEventListener('mousedown', onClick);
    };
  }, [open]);

  async function choose(teamId: string) {
    if (teamId === currentTeamId) {
      setOpen(false);
      return;
    }
    setBusy(true);
    setError(null);
    try {
      const r = await switchTeam({ teamId });
      if (!r.ok) {
        setError(r.error);
        return;
      }
      setOpen(false);
      // A project page belongs to one team; go back to the list of the team just chosen.
      if (pathname.startsWith('/projects/')) router.push('/');
      router.refresh();
    } catch {
      setError('Switching teams did not work just now. Try again in a moment.');
    } finally {
      setBusy(false);
    }
  }

  return (
    <div className="relative">
      <button
        ref={buttonRef}
        type="button"
        aria-expanded={open}
        aria-controls={panelId}
        onClick={() => setOpen((o) => !o)}
        className="flex items-center gap-2 rounded border border-slate-300 bg-white px-3 py-1.5 text-sm hover:bg-slate-50"
      >
        <span className="sr-only">Current team: </span>
        <span className="max-w-48 truncate font-medium">{current ? current.name : 'No team'}</span>
        {current ? <span className="text-slate-600">· {ROLE_LABEL[current.role]}</span> : null}
        <span aria-hidden="true">▾</span>
      </button>
      {open ? (
        <div
          id={panelId}
          ref={panelRef}
          className="absolute right-0 z-20 mt-1 w-72 space-y-3 rounded border border-slate-300 bg-white p-3 text-sm shadow-lg"
        >
          <p className="text-slate-600">
            Signed in as <span className="font-medium text-ink">{userName}</span>
          </p>
          {error ? <Notice kind="problem">{error}</Notice> : null}
          {teams.length > 0 ? (
            <nav aria-label="Your teams">
              <ul className="space-y-1">
                {teams.map((t) => (
                  <li key={t.teamId}>
                    <button
                      type="button"
                      disabled={busy}
                      aria-current={t.teamId === currentTeamId ? 'true' : undefined}
                      onClick={() => choose(t.teamId)}
                      className="flex w-full items-center justify-between rounded px-2 py-1 text-left hover:bg-slate-100 aria-[current=true]:font-semibold"
                    >
                      <span className="truncate">
                        {t.teamId === currentTeamId ? <span aria-hidden="true">● </span> : <span aria-hidden="true">○ </span>}
                        {t.name}
                      </span>
                      <span className="text-slate-600">{ROLE_LABEL[t.role]}</span>
                    </button>
                  </li>
                ))}
              </ul>
            </nav>
          ) : (
            <p>You are not in a team yet.</p>
          )}
          <div className="flex items-center justify-between border-t border-slate-200 pt-3">
            <Link href="/team#new-team" className="text-oi-blue underline" onClick={() => setOpen(false)}>
              Start a new team
            </Link>
            <SignOutButton />
          </div>
        </div>
      ) : null}
    </div>
  );
}
