import type { Metadata } from 'next';
import { notFound } from 'next/navigation';
import { ProjectNav } from '@/components/ProjectNav';
import { requireResourceForPage } from '@/lib/server/authz/page';
import { getProjectOverview } from '@/lib/server/dal/projects';

export const metadata: Metadata = { title: 'Project' };
export const dynamic = 'force-dynamic';

/**
 * Project overview. Membership of the project's team is re-read from the database; an unknown
 * id and another team's project both show the not-found page.
 */
export default async function ProjectPage({ params }: { params: Promise<{ projectId: string }> }) {
  const { projectId } = await params;
  const access = await requireResourceForPage({ projectId }, `/projects/${projectId}`);
  const project = await getProjectOverview(access.scope, projectId);
  if (!project) notFound();
  return (
    <div className="space-y-6">
      <div className="space-y-3">
        <h1 className="text-2xl font-semibold">{project.name}</h1>
        <ProjectNav projectId={projectId} active="overview" showSettings={access.membership.role === 'lead'} />
        {project.description ? <p className="max-w-3xl text-slate-700">{project.description}</p> : null}
      </div>
      <dl className="grid max-w-xl grid-cols-3 gap-4 text-sm">
        <div className="rounded border border-slate-300 bg-white p-3">
          <dt className="text-slate-600">Samples</dt>
          <dd className="text-xl font-semibold">{project.sampleCount.toLocaleString('en-US')}</dd>
        </div>
        <div className="rounded border border-slate-300 bg-white p-3">
          <dt className="text-slate-600">Current revision</dt>
          <dd className="text-xl font-semibold">{project.currentRevision}</dd>
        </div>
        <div className="rounded border border-slate-300 bg-white p-3">
          <dt className="text-slate-600">Features per sample</dt>
          <dd className="text-xl font-semibold">{project.featureCount}</dd>
        </div>
      </dl>
      <section aria-labelledby="classes-heading" className="space-y-2">
        <h2 id="classes-heading" className="text-lg font-semibold">
          Classes ({project.classes.length})
        </h2>
        <table className="border-collapse text-sm">
          <thead>
            <tr className="border-b border-slate-300 text-left">
              <th scope="col" className="py-1 pr-6 font-semibold">Class</th>
              <th scope="col" className="py-1 text-right font-semibold">Samples now</th>
            </tr>
          </thead>
          <tbody>
            {project.classes.map((c) => (
              <tr key={c.name} className="border-b border-slate-200">
                <td className="py-1 pr-6">{c.name}</td>
                <td className="py-1 text-right tabular-nums">{c.sampleCount.toLocaleString('en-US')}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </section>
      <p className="text-sm text-slate-600">Your role in this team: {access.membership.role}.</p>
    </div>
  );
}
