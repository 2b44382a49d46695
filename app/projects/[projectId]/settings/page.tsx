import type { Metadata } from 'next';
import { ProjectNav } from '@/components/ProjectNav';
import { SettingsForm } from '@/components/queue/SettingsForm';
import { roleAtLeast } from '@/lib/domain';
import { requireResourceForPage } from '@/lib/server/authz/page';
import { db } from '@/lib/server/db';
import { queueProjectHeader } from '@/lib/server/queue/view';

export const metadata: Metadata = { title: 'Settings' };
export const dynamic = 'force-dynamic';

/** Fit and queue settings of a project; leads change them, others are told why they cannot. */
export default async function SettingsPage({ params }: { params: Promise<{ projectId: string }> }) {
  const { projectId } = await params;
  const access = await requireResourceForPage({ projectId }, `/projects/${projectId}/settings`);
  const header = await queueProjectHeader({ db: db() }, access.scope, projectId);
  const isLead = roleAtLeast(access.membership.role, 'lead');
  return (
    <div className="space-y-4">
      <div className="space-y-3">
        <h1 className="text-2xl font-semibold">
          Settings <span className="text-base font-normal text-slate-600">· {header.name}</span>
        </h1>
        <ProjectNav projectId={projectId} active="settings" showSettings={isLead} />
      </div>
      {isLead ? (
        <SettingsForm projectId={projectId} initial={header.settings} />
      ) : (
        <p className="rounded border border-slate-300 bg-white p-4 text-sm">
          Only a lead of this team can change the project settings. Your role: {access.membership.role}.
        </p>
      )}
    </div>
  );
}
