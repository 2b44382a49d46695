/**
 * "Next" as the reviewer screen asks for it: claim an item (claim.ts) and read it for the screen
 * (view.ts). The caller's team scope is checked inside both statements (the claim's and the item
 * read's) rather than by a separate read of the project first: every sequential round trip counts
 * on the busiest request of the queue.
 */
import type { TeamScope } from '../authz/scope';
import { claimNext } from './claim';
import type { Actor, QueueDeps } from './context';
import { itemForReviewer, type ReviewItemView } from './view';
import { traced } from './trace';

export async function nextForReviewer(deps: QueueDeps, scope: TeamScope, actor: Actor, input: { projectId: string; skipItemId?: string }): Promise<ReviewItemView | null> {
  const claimed = await traced('next.claim', () => claimNext(deps, scope, actor, input));
  if (!claimed) return null;
  return traced('next.view', () => itemForReviewer(deps, scope, actor, input.projectId, claimed.itemId));
}
