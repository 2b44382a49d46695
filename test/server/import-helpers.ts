// Shared set-up for the import / export / pipeline tests: a fresh migrated database (SQLite or
// PostgreSQL through db-harness), a team with a project, and helpers to feed text as a stream.

import type { Db } from '@/lib/server/db';
import { mintTeamScope, type TeamScope } from '@/lib/server/authz/scope';
import { importSamples, type ImportOptions, type ImportOutcome } from '@/lib/server/import';
import type { ImportMode } from '@/lib/domain-data';
import { createTestDatabase, type TestDatabase } from './db-harness';

export type ImportWorld = {
  t: TestDatabase;
  db: Db;
  teamId: string;
  userId: string;
  scope: TeamScope;
  close: () => Promise<void>;
};

export async function openImportWorld(): Promise<ImportWorld> {
  const t = await createTestDatabase();
  await t.migrate();
  const db = t.client();
  const team = await db.team.create({ data: { name: 'Tidewater Labs' } });
  const user = await db.user.create({ data: { email: 'lead@tidewater.example', name: 'Lee Lead', passwordHash: 'x' } });
  await db.membership.create({ data: { teamId: team.id, userId: user.id, role: 'lead' } });
  return { t, db, teamId: team.id, userId: user.id, scope: mintTeamScope(team.id), close: () => t.drop() };
}

let projectCounter = 0;

/** A project with `featureCount` features and optional classes. */
export async function newProject(
  w: ImportWorld,
  options: { featureCount?: number; maxClasses?: number; classes?: string[] } = {},
): Promise<string> {
  projectCounter++;
  const p = await w.db.project.create({
    data: {
      teamId: w.teamId,
      name: `Project ${projectCounter}`,
      featureCount: options.featureCount ?? 3,
      maxClasses: options.maxClasses ?? 50,
      settings: '{}',
    },
  });
  if (options.classes && options.classes.length > 0) {
    await w.db.projectClass.createMany({ data: options.classes.map((name, position) => ({ projectId: p.id, name, position })) });
  }
  return p.id;
}

/** Bytes as a stream of chunks of `chunk` bytes (to exercise chunk boundaries). */
export async function* chunked(data: Uint8Array | string, chunk = 7): AsyncGenerator<Uint8Array> {
  const bytes = typeof data === 'string' ? new TextEncoder().encode(data) : data;
  for (let i = 0; i < bytes.length; i += chunk) yield bytes.slice(i, i + chunk);
}

export function runImport(
  w: ImportWorld,
  projectId: string,
  data: Uint8Array | string,
  options: { mode?: ImportMode; featurePrefix?: string; fileName?: string; chunk?: number } & ImportOptions = {},
): Promise<ImportOutcome> {
  const { mode, featurePrefix, fileName, chunk, ...rest } = options;
  return importSamples(
    w.scope,
    projectId,
    { source: chunked(data, chunk ?? 4096), fileName: fileName ?? 'data.csv', mode: mode ?? 'insert', featurePrefix, userId: w.userId },
    { client: w.db, ...rest },
  );
}

/** The project's data as plain rows, for before/after comparisons (features as hex). */
export async function projectState(w: ImportWorld, projectId: string) {
  const [project, classes, samples, revisions, changes, fits] = await Promise.all([
    w.db.project.findUnique({ where: { id: projectId }, select: { currentRevision: true, featureCount: true, maxClasses: true } }),
    w.db.projectClass.findMany({ where: { projectId }, orderBy: { position: 'asc' }, select: { name: true, position: true } }),
    w.db.sample.findMany({
      where: { projectId },
      orderBy: { externalId: 'asc' },
      select: {
        id: true,
        externalId: true,
        features: true,
        text: true,
        imageRef: true,
        metadata: true,
        originalLabel: true,
        currentLabel: true,
        labelRevision: true,
        addedRevision: true,
        updatedAt: true,
      },
    }),
    w.db.revision.findMany({ where: { projectId }, orderBy: { number: 'asc' }, select: { id: true, number: true, kind: true, changeCount: true } }),
    w.db.labelChange.findMany({ where: { projectId }, orderBy: { id: 'asc' } }),
    w.db.fit.findMany({ where: { projectId }, orderBy: { id: 'asc' }, select: { id: true, status: true, revisionNumber: true } }),
  ]);
  return {
    project,
    classes,
    samples: samples.map((s) => ({ ...s, features: Buffer.from(s.features).toString('hex') })),
    revisions,
    changes,
    fits,
  };
}
