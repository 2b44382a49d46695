/**
 * "Next" as the reviewer screen asks for it: claim an item (claim.ts) and read it for the screen
 * (view.ts), with the project read and checked against the caller's scope once for both.
 */
import { roleAtLeast } from '../../domain';
import type { TeamScope } from '../authz/scope';
import { forbidden } from '../authz/errors';
import { claimInProject } from './claim';
import { projectInScope, type Actor, type QueueDeps } from './context';
import { QUEUE_MESSAGES } from './messages';
import { reviewerItemView, type ReviewItemView } from './view';
import { traced } from './trace';

export async function nextForReviewer(deps: QueueDeps, scope: TeamScope, actor: Actor, input: { projectId: string; skipItemId?: string }): Promise<ReviewItemView | null> {
  if (!roleAtLeast(actor.role, 'reviewer')) throw forbidden(QUEUE_MESSAGES.observerVote);
  const project = await traced('next.project', () => projectInScope(deps.db, scope, input.projectId));
  const claimed = await traced('next.claim', () => claimInProject(deps, project.id, actor.userId, input.skipItemId));
  if (!claimed) return null;
  return traced('next.view', () => reviewerItemView(deps, project, actor, claimed.itemId));
}
