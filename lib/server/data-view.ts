/**
 * What the Data screen shows: the project's shape, its import history and (for leads) its
 * pipeline tokens. Every query is filtered by the team scope; another team's project is null.
 */
import type { TeamScope } from './authz/scope';
import { db, type Db } from './db';
import { listPipelineTokens } from './tokens';

export type ImportHistoryItem = {
  id: string;
  status: string;
  fileName: string;
  format: string;
  mode: string;
  rowCount: number;
  revisionNumber: number | null;
  error: string | null;
  createdBy: string | null;
  createdAt: string;
  finishedAt: string | null;
};

export type TokenItem = {
  id: string;
  name: string;
  prefix: string;
  createdBy: string;
  createdAt: string;
  lastUsedAt: string | null;
  revokedAt: string | null;
};

export type DataScreen = {
  project: {
    id: string;
    name: string;
    featureCount: number;
    maxClasses: number;
    currentRevision: number;
    sampleCount: number;
    classes: string[];
  };
  imports: ImportHistoryItem[];
  /** Only for leads (null otherwise). */
  tokens: TokenItem[] | null;
};

export const HISTORY_LENGTH = 30;

export async function loadDataScreen(scope: TeamScope, projectId: string, options: { isLead: boolean; client?: Db }): Promise<DataScreen | null> {
  const client = options.client ?? db();
  const project = await client.project.findFirst({
    where: { id: projectId, teamId: scope.teamId },
    select: {
      id: true,
      name: true,
      featureCount: true,
      maxClasses: true,
      currentRevision: true,
      _count: { select: { samples: true } },
      classes: { orderBy: { position: 'asc' }, select: { name: true } },
    },
  });
  if (project === null) return null;
  const batches = await client.importBatch.findMany({
    where: { projectId },
    orderBy: { createdAt: 'desc' },
    take: HISTORY_LENGTH,
    select: {
      id: true,
      status: true,
      fileName: true,
      format: true,
      mode: true,
      rowCount: true,
      revisionNumber: true,
      error: true,
      createdAt: true,
      finishedAt: true,
      createdBy: { select: { name: true } },
    },
  });
  const tokens = options.isLead ? await listPipelineTokens(scope, projectId, client) : null;
  return {
    project: {
      id: project.id,
      name: project.name,
      featureCount: project.featureCount,
      maxClasses: project.maxClasses,
      currentRevision: project.currentRevision,
      sampleCount: project._count.samples,
      classes: project.classes.map((c) => c.name),
    },
    imports: batches.map((b) => ({
      id: b.id,
      status: b.status,
      fileName: b.fileName,
      format: b.format,
      mode: b.mode,
      rowCount: b.rowCount,
      revisionNumber: b.revisionNumber,
      error: b.error,
      createdBy: b.createdBy?.name ?? null,
      createdAt: b.createdAt.toISOString(),
      finishedAt: b.finishedAt?.toISOString() ?? null,
    })),
    tokens:
      tokens?.map((t) => ({
        id: t.id,
        name: t.name,
        prefix: t.prefix,
        createdBy: t.createdBy,
        createdAt: t.createdAt.toISOString(),
        lastUsedAt: t.lastUsedAt?.toISOString() ?? null,
        revokedAt: t.revokedAt?.toISOString() ?? null,
      })) ?? null,
  };
}
