/**
 * Changing a project's fit and queue settings (leads only).
 *
 * Any change other than the apply rule queues a refit of the current revision with the new
 * settings (the fit's snapshot records them); the queue is rebuilt when that fit completes. A
 * lowered apply rule applies pending changes at once if enough are waiting.
 */
import { mergeProjectSettings, readProjectSettings, type ProjectSettings } from '../../domain-queue';
import { roleAtLeast } from '../../domain';
import type { TeamScope } from '../authz/scope';
import { badRequest, forbidden } from '../authz/errors';
import { enqueueCurrentRevisionTx } from '../fits/enqueue';
import { notifyFitQueued } from '../fits/jobs';
import { maybeAutoApply } from './apply';
import { projectInScope, type Actor, type QueueDeps } from './context';
import { QUEUE_MESSAGES } from './messages';
import { writeTx } from './tx';

export interface SettingsUpdate {
  readonly settings: ProjectSettings;
  /** the refit queued for the new settings, if any */
  readonly refit: { fitId: string; revisionNumber: number } | null;
}

/** Cross-field checks the schema cannot express field by field. */
export function settingsProblem(s: ProjectSettings): { field: string; message: string } | null {
  if (s.solver === 'dcd' && s.kernel !== 'linear') {
    return { field: 'solver', message: 'Dual coordinate descent solves the linear kernel only; choose smo or auto for this kernel.' };
  }
  return null;
}

export async function updateProjectSettings(deps: QueueDeps, scope: TeamScope, actor: Actor, projectId: string, next: ProjectSettings): Promise<SettingsUpdate> {
  if (!roleAtLeast(actor.role, 'lead')) throw forbidden(QUEUE_MESSAGES.leadOnlySettings);
  const problem = settingsProblem(next);
  if (problem) throw badRequest(problem.message, { [`settings.${problem.field}`]: problem.message });
  const project = await projectInScope(deps.db, scope, projectId);
  const result = await writeTx(deps.db, [{ table: 'Project', id: project.id }], async (tx) => {
    const fresh = await tx.project.findUniqueOrThrow({ where: { id: project.id }, select: { settings: true } });
    const before = readProjectSettings(fresh.settings);
    await tx.project.update({ where: { id: project.id }, data: { settings: mergeProjectSettings(fresh.settings, next) } });
    const { applyEvery: _a, ...restBefore } = before;
    const { applyEvery: _b, ...restNext } = next;
    const refitNeeded = JSON.stringify(restBefore) !== JSON.stringify(restNext);
    const refit = refitNeeded ? await enqueueCurrentRevisionTx(tx, project.id) : null;
    return { refit, applyLowered: next.applyEvery !== before.applyEvery };
  });
  if (result.refit) await notifyFitQueued({ projectId: project.id, revisionNumber: result.refit.revisionNumber, fitId: result.refit.fitId });
  if (result.applyLowered) await maybeAutoApply(deps, scope, project.id, actor.userId);
  return { settings: next, refit: result.refit };
}
