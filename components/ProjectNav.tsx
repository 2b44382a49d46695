import Link from 'next/link';

export type ProjectScreen = 'overview' | 'queue' | 'boundary' | 'revisions' | 'data' | 'settings';

const SCREENS: readonly { key: ProjectScreen; label: string; path: string }[] = [
  { key: 'overview', label: 'Overview', path: '' },
  { key: 'queue', label: 'Queue', path: '/queue' },
  { key: 'boundary', label: 'Boundary', path: '/boundary' },
  { key: 'revisions', label: 'Revisions', path: '/revisions' },
  { key: 'data', label: 'Data', path: '/data' },
  { key: 'settings', label: 'Settings', path: '/settings' },
];

/**
 * The screens of one project. The current screen is marked with aria-current and an underline
 * bar (not colour alone). Server component; pass `showSettings={false}` to hide Settings from
 * non-leads.
 */
export function ProjectNav({ projectId, active, showSettings = true }: { projectId: string; active: ProjectScreen; showSettings?: boolean }) {
  return (
    <nav aria-label="Project screens" className="border-b border-slate-300">
      <ul className="flex flex-wrap gap-1 text-sm">
        {SCREENS.filter((s) => showSettings || s.key !== 'settings').map((s) => {
          const current = s.key === active;
          return (
            <li key={s.key}>
              <Link
                href={`/projects/${projectId}${s.path}`}
                aria-current={current ? 'page' : undefined}
                className={`-mb-px inline-block border-b-4 px-3 py-2 ${current ? 'border-ink font-semibold text-ink' : 'border-transparent text-slate-700 hover:border-slate-300'}`}
              >
                {s.label}
              </Link>
            </li>
          );
        })}
      </ul>
    </nav>
  );
}
