import type { Metadata } from 'next';
import Link from 'next/link';
import { notFound } from 'next/navigation';
import { BoundaryScatter } from '@/components/charts/BoundaryScatter';
import { DistanceHistogram } from '@/components/charts/DistanceHistogram';
import { ProjectNav } from '@/components/ProjectNav';
import { ClassShape } from '@/components/queue/ClassBadge';
import { SampleDetailPanel } from '@/components/revisions/SampleDetailPanel';
import { num } from '@/components/revisions/format';
import { requireResourceForPage } from '@/lib/server/authz/page';
import { db } from '@/lib/server/db';
import { ensureFitWorker } from '@/lib/server/fits';
import { boundaryData, sampleDetail } from '@/lib/server/revisions';
import { IdSchema } from '@/lib/domain';

export const metadata: Metadata = { title: 'Boundary' };
export const dynamic = 'force-dynamic';

function one(v: string | string[] | undefined): string | undefined {
  return Array.isArray(v) ? v[0] : v;
}

/** Where the samples sit against one boundary of the newest fit (thin: data from lib/server/revisions). */
export default async function BoundaryPage({ params, searchParams }: { params: Promise<{ projectId: string }>; searchParams: Promise<Record<string, string | string[] | undefined>> }) {
  const { projectId } = await params;
  const sp = await searchParams;
  const access = await requireResourceForPage({ projectId }, `/projects/${projectId}/boundary`);
  void ensureFitWorker().catch(() => undefined);
  const client = db();
  const k = /^\d{1,3}$/.test(one(sp.boundary) ?? '') ? Number(one(sp.boundary)) : 0;
  const sampleId = one(sp.sample);
  const pairA = one(sp.a);
  const pairB = one(sp.b);
  const choice = pairA && pairB && pairA.length <= 200 && pairB.length <= 200 ? { kind: 'pair' as const, a: pairA, b: pairB } : { kind: 'ovr' as const, index: k };
  const [result, sample] = await Promise.all([
    boundaryData(client, access.scope, projectId, choice),
    sampleId && IdSchema.safeParse(sampleId).success ? sampleDetail(client, access.scope, projectId, sampleId) : Promise.resolve(null),
  ]);
  if (!result) notFound();
  const name = result.kind === 'ok' ? result.data.projectName : result.projectName;
  const heading = (
    <div className="space-y-3">
      <h1 className="text-2xl font-semibold">
        Boundary <span className="text-base font-normal text-slate-600">· {name}</span>
      </h1>
      <ProjectNav projectId={projectId} active="boundary" showSettings={access.membership.role === 'lead'} />
    </div>
  );
  if (result.kind === 'no-fit') {
    return (
      <div className="space-y-6">
        {heading}
        {sample ? <SampleDetailPanel sample={sample} closeHref={`/projects/${projectId}/boundary`} /> : null}
        <p className="rounded border border-slate-300 bg-white p-3" data-testid="no-fit">
          No fit yet for revision {result.currentRevision}. {result.pending ? 'A fit is queued or running; reload this page when it has finished.' : 'A first fit will be queued shortly; reload this page in a minute.'}
        </p>
      </div>
    );
  }
  const d = result.data;
  const base = d.pair
    ? `/projects/${projectId}/boundary?a=${encodeURIComponent(d.pair[0])}&b=${encodeURIComponent(d.pair[1])}`
    : `/projects/${projectId}/boundary?boundary=${d.boundary}`;
  const sideLabel = d.pair ? `${d.pair[0]} over ${d.pair[1]}` : d.positive;
  const flagged = d.flagged;
  const verticalWords =
    d.vertical === 'orthogonal-to-w'
      ? `leading principal direction orthogonal to w (${(d.verticalShare * 100).toFixed(0)} % of the remaining variance)`
      : `leading principal direction of the inputs (kernel fit: a stand-in, ${(d.verticalShare * 100).toFixed(0)} % of the variance)`;
  return (
    <div className="space-y-6">
      {heading}
      {sample ? <SampleDetailPanel sample={sample} closeHref={base} /> : null}
      <section aria-labelledby="chooser-heading" className="space-y-2">
        <h2 id="chooser-heading" className="text-lg font-semibold" data-testid="fit-revision" data-value={d.revision}>
          {d.pair ? `${d.pair[0]} against ${d.pair[1]}, fit of revision ${d.revision}` : `Boundary of the fit of revision ${d.revision}`}
          {d.revision !== d.currentRevision ? <span className="text-sm font-normal"> (the current revision {d.currentRevision} is not fitted yet)</span> : null}
        </h2>
        {d.boundaries.length > 1 ? (
          <nav aria-label="Choose the boundary">
            <ul className="flex flex-wrap gap-2 text-sm">
              {d.boundaries.map((b) => (
                <li key={b.index}>
                  <Link
                    href={`/projects/${projectId}/boundary?boundary=${b.index}`}
                    aria-current={!d.pair && b.index === d.boundary ? 'page' : undefined}
                    className={`inline-flex items-center gap-1 rounded border px-2 py-1 ${!d.pair && b.index === d.boundary ? 'border-ink border-2 font-semibold' : 'border-slate-400 bg-white'}`}
                  >
                    <ClassShape index={d.classes.indexOf(b.positive)} /> {b.positive} vs the rest
                  </Link>
                </li>
              ))}
            </ul>
          </nav>
        ) : null}
        {d.boundaries.length > 2 ? (
          <form method="get" className="flex flex-wrap items-end gap-2 text-sm" aria-label="Show a pair of classes">
            <label className="flex items-center gap-1">
              Pair: class
              <select name="a" defaultValue={d.pair?.[0] ?? d.boundaries[0].positive} className="rounded border border-slate-400 bg-white px-2 py-1">
                {d.boundaries.map((b) => (
                  <option key={b.index} value={b.positive}>
                    {b.positive}
                  </option>
                ))}
              </select>
            </label>
            <label className="flex items-center gap-1">
              against
              <select name="b" defaultValue={d.pair?.[1] ?? d.boundaries[1].positive} className="rounded border border-slate-400 bg-white px-2 py-1">
                {d.boundaries.map((b) => (
                  <option key={b.index} value={b.positive}>
                    {b.positive}
                  </option>
                ))}
              </select>
            </label>
            <button type="submit" className="rounded bg-ink px-3 py-1 text-white">
              Show the pair
            </button>
          </form>
        ) : null}
        {d.pair ? (
          <p className="max-w-3xl text-sm" data-testid="pair-note">
            Showing the samples labelled {d.pair[0]} or {d.pair[1]} against the rule &ldquo;{d.pair[0]}&apos;s score beats {d.pair[1]}&apos;s&rdquo; (the difference of their one-vs-rest scores). This rule was not trained as a margin, so there is no margin band; a sample is on the wrong side when the other class outscores its own.
          </p>
        ) : null}
        <dl className="grid max-w-3xl grid-cols-2 gap-3 text-sm sm:grid-cols-4">
          <div className="rounded border border-slate-300 bg-white p-2">
            <dt className="text-slate-600">Margin width 2/‖w‖</dt>
            <dd className="text-lg font-semibold tabular-nums" data-testid="boundary-margin-width" data-value={d.marginWidth ?? ''}>
              {num(d.marginWidth, 5)}
            </dd>
          </div>
          <div className="rounded border border-slate-300 bg-white p-2">
            <dt className="text-slate-600">Samples</dt>
            <dd className="text-lg font-semibold tabular-nums" data-testid="boundary-sample-count" data-value={d.total}>
              {d.total.toLocaleString('en-US')}
            </dd>
          </div>
          <div className="rounded border border-slate-300 bg-white p-2">
            <dt className="text-slate-600">Wrong side</dt>
            <dd className="text-lg font-semibold tabular-nums">{d.wrongSide.toLocaleString('en-US')}</dd>
          </div>
          <div className="rounded border border-slate-300 bg-white p-2">
            <dt className="text-slate-600">Inside the margin</dt>
            <dd className="text-lg font-semibold tabular-nums">{d.insideMargin.toLocaleString('en-US')}</dd>
          </div>
        </dl>
        <p className="text-xs text-slate-700">
          Kernel {d.kernel}. Labels as of revision {d.revision}. Vertical axis of the picture: {verticalWords}.
        </p>
      </section>
      <DistanceHistogram x={d.histogram.x} c={d.histogram.c} classes={d.classes} band={d.band} positive={sideLabel} />
      <BoundaryScatter points={d.points} classes={d.classes} band={d.band} positive={sideLabel} vertical={d.vertical === 'orthogonal-to-w' ? 'principal direction ⟂ w' : 'principal direction of the inputs'} sampleHref={`${base}&sample=`} total={d.total} />
      <section aria-labelledby="flagged-heading" className="space-y-2">
        <h2 id="flagged-heading" className="text-lg font-semibold">
          Outlined samples, farthest from the boundary first ({d.outlined.toLocaleString('en-US')}{d.outlined > flagged.length ? `, first ${flagged.length} listed` : ''})
        </h2>
        {flagged.length === 0 ? (
          <p className="text-sm">No sample is on the wrong side or inside the margin of this boundary.</p>
        ) : (
          <div className="max-h-80 overflow-auto rounded border border-slate-300 bg-white" tabIndex={0} role="region" aria-labelledby="flagged-heading">
            <table className="min-w-full border-collapse text-sm">
              <thead className="sticky top-0 bg-slate-50">
                <tr className="border-b border-slate-300 text-left">
                  <th scope="col" className="px-2 py-1">Sample</th>
                  <th scope="col" className="px-2 py-1">Label</th>
                  <th scope="col" className="px-2 py-1 text-right">Signed distance</th>
                  <th scope="col" className="px-2 py-1">Flags</th>
                </tr>
              </thead>
              <tbody>
                {flagged.map((p) => (
                  <tr key={p.id} className="border-b border-slate-200">
                    <th scope="row" className="px-2 py-1 text-left font-normal">
                      <Link className="underline" href={`${base}&sample=${encodeURIComponent(p.id)}`}>
                        {p.e}
                      </Link>
                    </th>
                    <td className="px-2 py-1">
                      <span className="inline-flex items-center gap-1">
                        <ClassShape index={p.c} /> {d.classes[p.c]}
                      </span>
                    </td>
                    <td className="px-2 py-1 text-right tabular-nums">{p.x.toPrecision(5)}</td>
                    <td className="px-2 py-1">{[(p.f & 1) !== 0 ? 'wrong side' : '', (p.f & 2) !== 0 ? 'inside margin' : '', (p.f & 8) !== 0 ? 'pivot' : ''].filter(Boolean).join(', ')}</td>
                  </tr>
                ))}
              </tbody>
            </table>
          </div>
        )}
      </section>
    </div>
  );
}
