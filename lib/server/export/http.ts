/**
 * Export responses: downloads for the Data screen and the labels endpoint of the pipeline API.
 */
import type { ExportQuery, LabelsQuery } from '../../domain-data';
import { notFound } from '../authz/errors';
import type { TeamScope } from '../authz/scope';
import { db } from '../db';
import { exportFileName, exportLabels, textStream } from './labels';
import { auditReport } from './report';

const CONTENT_TYPES = {
  csv: 'text/csv; charset=utf-8',
  jsonl: 'application/x-ndjson; charset=utf-8',
  report: 'application/json; charset=utf-8',
} as const;

function headers(contentType: string, fileName: string | null): Record<string, string> {
  const h: Record<string, string> = {
    'content-type': contentType,
    'cache-control': 'no-store',
    'x-content-type-options': 'nosniff',
  };
  if (fileName !== null) h['content-disposition'] = `attachment; filename="${fileName}"`;
  return h;
}

/** A download of the labels (CSV / JSON Lines) or of the audit report. */
export async function exportDownload(scope: TeamScope, query: ExportQuery): Promise<Response> {
  const project = await db().project.findFirst({ where: { id: query.projectId, teamId: scope.teamId }, select: { name: true } });
  if (project === null) throw notFound();
  const day = new Date().toISOString().slice(0, 10);
  if (query.format === 'report') {
    const report = await auditReport(scope, query.projectId);
    return new Response(`${JSON.stringify(report, null, 2)}\n`, {
      headers: headers(CONTENT_TYPES.report, exportFileName(project.name, `audit-${day}.json`)),
    });
  }
  const suffix = `labels${query.since === undefined ? '' : `-since-r${query.since}`}-${day}.${query.format === 'csv' ? 'csv' : 'jsonl'}`;
  const body = textStream(exportLabels(scope, query.projectId, { format: query.format, features: query.features, since: query.since }));
  return new Response(body, { headers: headers(CONTENT_TYPES[query.format], exportFileName(project.name, suffix)) });
}

/** The pipeline API's labels: streamed, no attachment header. */
export async function labelsResponse(scope: TeamScope, query: LabelsQuery): Promise<Response> {
  const chunks = exportLabels(scope, query.projectId, { format: query.format, features: query.features, since: query.since });
  // Read the first chunk before answering, so a missing project is a 404 and not a broken stream.
  const first = await chunks.next();
  async function* all(): AsyncGenerator<string> {
    if (!first.done) yield first.value;
    yield* chunks;
  }
  return new Response(textStream(all()), { headers: headers(CONTENT_TYPES[query.format], null) });
}
