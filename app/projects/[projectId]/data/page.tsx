import type { Metadata } from 'next';
import { notFound } from 'next/navigation';
import { ExportPanel } from '@/components/data/ExportPanel';
import { ImportHistory } from '@/components/data/ImportHistory';
import { ImportPanel } from '@/components/data/ImportPanel';
import { TokenPanel } from '@/components/data/TokenPanel';
import { ProjectNav } from '@/components/ProjectNav';
import { roleAtLeast } from '@/lib/domain';
import { requireResourceForPage } from '@/lib/server/authz/page';
import { loadDataScreen } from '@/lib/server/data-view';

export const metadata: Metadata = { title: 'Data' };
export const dynamic = 'force-dynamic';

/**
 * The Data screen: import (leads), import history, export (leads) and pipeline tokens (leads).
 * Thin: data from lib/server/data-view.ts, screen parts in components/data/.
 */
export default async function DataPage({ params }: { params: Promise<{ projectId: string }> }) {
  const { projectId } = await params;
  const access = await requireResourceForPage({ projectId }, `/projects/${projectId}/data`);
  const isLead = roleAtLeast(access.membership.role, 'lead');
  const screen = await loadDataScreen(access.scope, projectId, { isLead });
  if (!screen) notFound();
  const { project } = screen;
  return (
    <div className="space-y-6">
      <div className="space-y-3">
        <h1 className="text-2xl font-semibold">
          Data <span className="text-base font-normal text-slate-600">· {project.name}</span>
        </h1>
        <ProjectNav projectId={projectId} active="data" showSettings={isLead} />
      </div>
      <p className="text-sm text-slate-700">
        {project.sampleCount.toLocaleString('en-US')} samples · {project.featureCount > 0 ? `${project.featureCount} features each` : 'no features yet'} ·{' '}
        {project.classes.length} classes · revision {project.currentRevision}
      </p>

      {isLead ? (
        <ImportPanel projectId={projectId} featureCount={project.featureCount} maxClasses={project.maxClasses} classCount={project.classes.length} />
      ) : (
        <p className="rounded border border-slate-300 bg-white p-4 text-sm">
          Only a lead of this team can import or export data and manage pipeline tokens. Your role: {access.membership.role}.
        </p>
      )}

      <ImportHistory items={screen.imports} />

      {isLead ? <ExportPanel projectId={projectId} currentRevision={project.currentRevision} /> : null}
      {isLead && screen.tokens ? <TokenPanel projectId={projectId} tokens={screen.tokens} /> : null}
    </div>
  );
}
