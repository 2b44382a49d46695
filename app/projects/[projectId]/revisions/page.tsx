import type { Metadata } from 'next';
import { notFound } from 'next/navigation';
import { ProjectNav } from '@/components/ProjectNav';
import { AgreementSection } from '@/components/revisions/AgreementSection';
import { DiffSection } from '@/components/revisions/DiffSection';
import { RevisionCharts } from '@/components/revisions/RevisionCharts';
import { RevisionTable } from '@/components/revisions/RevisionTable';
import { requireResourceForPage } from '@/lib/server/authz/page';
import { db } from '@/lib/server/db';
import { ensureFitWorker } from '@/lib/server/fits';
import { agreementSummary, revisionDiff, revisionTimeline } from '@/lib/server/revisions';

export const metadata: Metadata = { title: 'Revisions' };
export const dynamic = 'force-dynamic';

function revisionParam(v: string | string[] | undefined): number | null {
  const s = Array.isArray(v) ? v[0] : v;
  if (s === undefined || !/^\d{1,9}$/.test(s)) return null;
  return Number(s);
}

/** How the margin, the violations and the agreement evolve over revisions (thin: data from lib/server/revisions). */
export default async function RevisionsPage({ params, searchParams }: { params: Promise<{ projectId: string }>; searchParams: Promise<Record<string, string | string[] | undefined>> }) {
  const { projectId } = await params;
  const sp = await searchParams;
  const access = await requireResourceForPage({ projectId }, `/projects/${projectId}/revisions`);
  void ensureFitWorker().catch(() => undefined);
  const client = db();
  const timeline = await revisionTimeline(client, access.scope, projectId);
  if (!timeline) notFound();
  const numbers = timeline.revisions.map((r) => r.number);
  const last = numbers[numbers.length - 1] ?? 0;
  const from = revisionParam(sp.from) ?? numbers[Math.max(0, numbers.length - 2)] ?? 0;
  const to = revisionParam(sp.to) ?? last;
  const [diff, agreement] = await Promise.all([
    numbers.length >= 2 && numbers.includes(from) && numbers.includes(to) ? revisionDiff(client, access.scope, projectId, from, to) : Promise.resolve(null),
    agreementSummary(client, access.scope, projectId),
  ]);
  const fitted = timeline.revisions.filter((r) => r.fit);
  const marks = fitted.filter((r) => r.settingsChanged.length > 0).map((r) => ({ revision: r.number, changed: r.settingsChanged }));
  return (
    <div className="space-y-6">
      <div className="space-y-3">
        <h1 className="text-2xl font-semibold">
          Revisions <span className="text-base font-normal text-slate-600">· {timeline.projectName}</span>
        </h1>
        <ProjectNav projectId={projectId} active="revisions" showSettings={access.membership.role === 'lead'} />
      </div>
      <section aria-labelledby="metrics-heading" className="space-y-3">
        <h2 id="metrics-heading" className="text-lg font-semibold">
          The boundaries revision by revision
        </h2>
        <p className="max-w-3xl text-sm text-slate-700">
          {timeline.revisions.length.toLocaleString('en-US')} revision{timeline.revisions.length === 1 ? '' : 's'}, {fitted.length} with a completed fit; the current revision is {timeline.currentRevision}. Each boundary separates one class from the rest.
          {marks.length > 0 ? ' A dashed mark in a chart (a bold rule in the table) shows where the fit settings changed: margins across that mark are not comparable.' : ''}
        </p>
        {fitted.length > 0 ? (
          <RevisionCharts
            rows={fitted.map((r) => ({ number: r.number, boundaries: r.boundaries.map((b) => ({ name: b.name, positive: b.positive, marginWidth: b.marginWidth, wrongSide: b.wrongSide, hingeLoss: b.hingeLoss, oofAccuracy: b.oofAccuracy })) }))}
            boundaryNames={timeline.boundaryNames}
            classes={timeline.classes}
            marks={marks}
          />
        ) : (
          <p className="rounded border border-slate-300 bg-white p-3 text-sm" data-testid="no-fit">
            No fit has finished yet for revision {timeline.currentRevision}. The first fit runs in the background; reload this page in a minute.
          </p>
        )}
        <RevisionTable revisions={timeline.revisions} classes={timeline.classes} />
      </section>
      <DiffSection projectId={projectId} numbers={numbers} diff={diff} />
      {agreement ? <AgreementSection a={agreement} /> : null}
    </div>
  );
}
