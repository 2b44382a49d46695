import type { Metadata } from 'next';
import Link from 'next/link';
import { requireUserForPage } from '@/lib/server/authz/page';
import { listProjects } from '@/lib/server/dal/projects';
import { currentTeamOf } from '@/lib/server/dal/teams';

// The root segment shares the layout's level, so the layout's title template does not apply here.
export const metadata: Metadata = { title: { absolute: 'Projects · Borderline' } };
export const dynamic = 'force-dynamic';

const count = (n: number, one: string, many: string) => `${n.toLocaleString('en-US')} ${n === 1 ? one : many}`;

/** Projects of the current team, read from the database on every visit. */
export default async function ProjectsPage() {
  const user = await requireUserForPage('/');
  const current = await currentTeamOf({ userId: user.id, lastTeamId: user.lastTeamId });
  if (!current) {
    return (
      <div className="mx-auto max-w-xl space-y-4">
        <h1 className="text-2xl font-semibold">Projects</h1>
        <p>You are not a member of any team yet, so there are no projects to show.</p>
        <Link href="/team#new-team" className="font-medium text-oi-blue underline">
          Start a team
        </Link>
      </div>
    );
  }
  const projects = await listProjects(current.scope);
  return (
    <div className="space-y-6">
      <div className="space-y-1">
        <h1 className="text-2xl font-semibold">Projects</h1>
        <p className="text-slate-600">
          {current.team.name} · {count(projects.length, 'project', 'projects')}
        </p>
      </div>
      {projects.length === 0 ? (
        <p>This team has no projects yet.</p>
      ) : (
        <ul className="grid gap-4 sm:grid-cols-2">
          {projects.map((p) => (
            <li key={p.id} className="rounded border border-slate-300 bg-white p-4">
              <h2 className="text-lg font-semibold">
                <Link href={`/projects/${p.id}`} className="text-oi-blue underline-offset-2 hover:underline">
                  {p.name}
                </Link>
              </h2>
              {p.description ? <p className="mt-1 line-clamp-2 text-sm text-slate-700">{p.description}</p> : null}
              <dl className="mt-3 flex flex-wrap gap-x-6 gap-y-1 text-sm">
                <div>
                  <dt className="sr-only">Samples</dt>
                  <dd>{count(p.sampleCount, 'sample', 'samples')}</dd>
                </div>
                <div>
                  <dt className="sr-only">Classes</dt>
                  <dd>{count(p.classCount, 'class', 'classes')}</dd>
                </div>
                <div>
                  <dt className="sr-only">Current revision</dt>
                  <dd>revision {p.currentRevision}</dd>
                </div>
              </dl>
            </li>
          ))}
        </ul>
      )}
    </div>
  );
}
