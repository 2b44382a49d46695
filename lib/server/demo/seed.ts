// Writes the demo (DESIGN.md §7) into a database: the team "Harbor Lane Support", its three users,
// and the project "Customer messages" with its samples as revision 0 (kind import) and one
// ImportBatch. Idempotent: when the team exists nothing is written unless `reset` is set, which
// first removes the demo team (cascading to its projects) and the demo users.

import { DEFAULT_PROJECT_SETTINGS, ProjectSettingsSchema } from '../../domain-queue';
import type { Db } from '../db';
import { encodeFeatures } from '../features';
import { hashPassword } from '../password';
import { DEMO_PROJECT, DEMO_TEAM_NAME, DEMO_USERS } from './constants';
import { generateDemo, type DemoDataset } from './generate';

export type SeedOptions = {
  /** Remove an existing demo team and users first. */
  reset?: boolean;
  /** Data set to write (default: generateDemo()). */
  dataset?: DemoDataset;
  /** Samples per insert statement. */
  batchSize?: number;
  log?: (line: string) => void;
};

export type SeedResult = {
  status: 'created' | 'exists';
  teamId: string;
  projectId: string | null;
  samples: number;
  planted: number;
};

/** Project settings of the demo: embeddings, so L2 normalisation; other fields at defaults. */
export function demoProjectSettings(): string {
  return JSON.stringify(ProjectSettingsSchema.parse({ ...DEFAULT_PROJECT_SETTINGS, scale: 'l2' }));
}

async function removeDemo(client: Db): Promise<void> {
  await client.team.deleteMany({ where: { name: DEMO_TEAM_NAME } });
  await client.user.deleteMany({ where: { email: { in: DEMO_USERS.map((u) => u.email) } } });
}

export async function seedDemo(client: Db, options: SeedOptions = {}): Promise<SeedResult> {
  const log = options.log ?? (() => undefined);
  const existing = await client.team.findFirst({
    where: { name: DEMO_TEAM_NAME },
    select: { id: true, projects: { select: { id: true, _count: { select: { samples: true } } } } },
  });
  if (existing !== null && options.reset !== true) {
    const project = existing.projects[0];
    return {
      status: 'exists',
      teamId: existing.id,
      projectId: project?.id ?? null,
      samples: project?._count.samples ?? 0,
      planted: 0,
    };
  }
  if (options.reset === true) {
    log('Removing the existing demo team and users …');
    await removeDemo(client);
  }

  const dataset = options.dataset ?? generateDemo();
  const batchSize = options.batchSize ?? 500;
  const hashes = await Promise.all(DEMO_USERS.map((u) => hashPassword(u.password)));
  log(`Writing ${dataset.samples.length} samples …`);

  return client.$transaction(
    async (tx) => {
      const users: { id: string }[] = [];
      for (const [i, u] of DEMO_USERS.entries()) {
        users.push(
          await tx.user.upsert({
            where: { email: u.email },
            create: { email: u.email, name: u.name, passwordHash: hashes[i] },
            update: { name: u.name, passwordHash: hashes[i] },
          }),
        );
      }
      const lead = users[DEMO_USERS.findIndex((u) => u.role === 'lead')];
      const team = await tx.team.create({ data: { name: DEMO_TEAM_NAME } });
      await tx.membership.createMany({
        data: DEMO_USERS.map((u, i) => ({ teamId: team.id, userId: users[i].id, role: u.role })),
      });
      await tx.user.updateMany({ where: { id: { in: users.map((u) => u.id) } }, data: { lastTeamId: team.id } });

      const project = await tx.project.create({
        data: {
          teamId: team.id,
          name: DEMO_PROJECT.name,
          description: DEMO_PROJECT.description,
          featureCount: dataset.dimension,
          settings: demoProjectSettings(),
          currentRevision: 0,
        },
      });
      await tx.projectClass.createMany({
        data: dataset.classes.map((name, position) => ({ projectId: project.id, name, position })),
      });
      await tx.revision.create({
        data: {
          projectId: project.id,
          number: 0,
          kind: 'import',
          note: 'Demo data set as imported',
          changeCount: 0,
          createdById: lead.id,
        },
      });
      const now = new Date();
      await tx.importBatch.create({
        data: {
          projectId: project.id,
          status: 'applied',
          fileName: 'customer-messages.jsonl',
          format: 'jsonl',
          mode: 'insert',
          rowCount: dataset.samples.length,
          revisionNumber: 0,
          createdById: lead.id,
          finishedAt: now,
        },
      });
      for (let start = 0; start < dataset.samples.length; start += batchSize) {
        await tx.sample.createMany({
          data: dataset.samples.slice(start, start + batchSize).map((s) => ({
            projectId: project.id,
            externalId: s.externalId,
            features: encodeFeatures(s.features),
            text: s.text,
            metadata: JSON.stringify(s.metadata),
            originalLabel: s.label,
            currentLabel: s.label,
            labelRevision: 0,
            addedRevision: 0,
          })),
        });
      }
      await tx.auditEvent.create({
        data: {
          action: 'team.created',
          teamId: team.id,
          userId: lead.id,
          targetType: 'team',
          targetId: team.id,
          detail: JSON.stringify({ demo: true, samples: dataset.samples.length }),
        },
      });
      return {
        status: 'created' as const,
        teamId: team.id,
        projectId: project.id,
        samples: dataset.samples.length,
        planted: dataset.planted.length,
      };
    },
    { timeout: 120_000, maxWait: 30_000 },
  );
}
