import type { Metadata } from 'next';
import { ProjectNav } from '@/components/ProjectNav';
import { QueueScreen } from '@/components/queue/QueueScreen';
import { requireResourceForPage } from '@/lib/server/authz/page';
import { db } from '@/lib/server/db';
import { ensureFitWorker } from '@/lib/server/fits';
import { queueProjectHeader, queueBoard } from '@/lib/server/queue/view';

export const metadata: Metadata = { title: 'Queue' };
export const dynamic = 'force-dynamic';

/** The review queue of a project (thin: data from lib/server/queue, screen in components/queue). */
export default async function QueuePage({ params }: { params: Promise<{ projectId: string }> }) {
  const { projectId } = await params;
  const access = await requireResourceForPage({ projectId }, `/projects/${projectId}/queue`);
  void ensureFitWorker().catch(() => undefined);
  const deps = { db: db() };
  const actor = { userId: access.user.id, role: access.membership.role };
  const [header, board] = await Promise.all([queueProjectHeader(deps, access.scope, projectId), queueBoard(deps, access.scope, actor, projectId)]);
  return (
    <div className="space-y-4">
      <div className="space-y-3">
        <h1 className="text-2xl font-semibold">
          Queue <span className="text-base font-normal text-slate-600">· {header.name}</span>
        </h1>
        <ProjectNav projectId={projectId} active="queue" showSettings={actor.role === 'lead'} />
      </div>
      <QueueScreen projectId={projectId} role={actor.role} classes={header.classes} initialBoard={board} />
    </div>
  );
}
