import Link from 'next/link';
import { TeamSwitcher } from './TeamSwitcher';

/**
 * Top bar: product mark, the Projects and Team screens, and the session-aware team switcher.
 * Screen links for one project (Queue, Boundary, Revisions, Data, Settings) live in the
 * project's own navigation.
 */
export function AppHeader() {
  return (
    <header className="border-b border-slate-300 bg-white">
      <div className="mx-auto flex max-w-6xl items-center gap-6 px-4 py-3">
        <Link href="/" className="flex items-center gap-2 font-semibold tracking-tight">
          <svg aria-hidden="true" width="22" height="22" viewBox="0 0 22 22">
            <circle cx="6" cy="15" r="3.5" fill="#0072b2" />
            <rect x="13" y="3.5" width="6" height="6" fill="#e69f00" />
            <line x1="2" y1="20" x2="20" y2="2" stroke="#1d232b" strokeWidth="1.5" />
          </svg>
          Borderline
        </Link>
        <nav aria-label="Main" className="flex gap-4 text-sm">
          <Link href="/" className="hover:underline">
            Projects
          </Link>
          <Link href="/team" className="hover:underline">
            Team
          </Link>
        </nav>
        <div className="ml-auto">
          <TeamSwitcher />
        </div>
      </div>
    </header>
  );
}
