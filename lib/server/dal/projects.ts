/**
 * Project reads for the Projects list and the project overview. Every query filters by the
 * scope's team, so another team's project id reads as "not there".
 */
import type { TeamScope } from '../authz/scope';
import { db } from '../db';

export type ProjectListItem = {
  id: string;
  name: string;
  description: string;
  sampleCount: number;
  classCount: number;
  currentRevision: number;
  updatedAt: Date;
};

export async function listProjects(scope: TeamScope): Promise<ProjectListItem[]> {
  const rows = await db().project.findMany({
    where: { teamId: scope.teamId },
    orderBy: [{ name: 'asc' }, { id: 'asc' }],
    select: {
      id: true,
      name: true,
      description: true,
      currentRevision: true,
      updatedAt: true,
      _count: { select: { samples: true, classes: true } },
    },
  });
  return rows.map((r) => ({
    id: r.id,
    name: r.name,
    description: r.description,
    sampleCount: r._count.samples,
    classCount: r._count.classes,
    currentRevision: r.currentRevision,
    updatedAt: r.updatedAt,
  }));
}

export type ProjectOverview = {
  id: string;
  name: string;
  description: string;
  featureCount: number;
  currentRevision: number;
  sampleCount: number;
  classes: { name: string; position: number; sampleCount: number }[];
  createdAt: Date;
};

/** null when the project does not exist or belongs to another team. */
export async function getProjectOverview(scope: TeamScope, projectId: string): Promise<ProjectOverview | null> {
  const client = db();
  const project = await client.project.findFirst({
    where: { id: projectId, teamId: scope.teamId },
    select: {
      id: true,
      name: true,
      description: true,
      featureCount: true,
      currentRevision: true,
      createdAt: true,
      classes: { orderBy: { position: 'asc' }, select: { name: true, position: true } },
      _count: { select: { samples: true } },
    },
  });
  if (!project) return null;
  const counts = await client.sample.groupBy({
    by: ['currentLabel'],
    where: { projectId: project.id, project: { teamId: scope.teamId } },
    _count: { _all: true },
  });
  const byLabel = new Map(counts.map((c) => [c.currentLabel, c._count._all]));
  return {
    id: project.id,
    name: project.name,
    description: project.description,
    featureCount: project.featureCount,
    currentRevision: project.currentRevision,
    sampleCount: project._count.samples,
    classes: project.classes.map((c) => ({ name: c.name, position: c.position, sampleCount: byLabel.get(c.name) ?? 0 })),
    createdAt: project.createdAt,
  };
}
