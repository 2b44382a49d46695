/**
 * "Next" as the reviewer screen asks for it: claim an item (claim.ts) and read it for the screen
 * (view.ts). The caller's team scope is checked inside both statements (the claim's and the item
 * read's) rather than by a separate read of the project first: every sequential round trip counts
 * on the busiest request of the queue.
 */
import type { TeamScope } from '../authz/scope';
import { claimNext } from './claim';
import type { Actor, QueueDeps } from './context';
import { itemForReviewer, reviewItemFromRow, type ReviewItemView } from './view';
import { traced } from '../trace';

/**
 * The reviewer screen's wait for a neighbour search that is not cached yet (QueueDeps.neighbourWaitMs):
 * one search of a 100k × 256 project takes 20–40 ms of a core, and when many reviewers ask at
 * once for items nobody searched ahead (a team starting together, the first requests after a
 * refit reordered the queue, no reading time) their searches queue on one thread. Past this wait
 * the screen gets the item at once and fetches it again for its neighbours (QueueScreen). In the
 * load tests it fired mostly when reviewers took items faster than the prefetch thread searched
 * (bench:queue's stress phase); the paced phase's slow opening burst on PostgreSQL turned out to
 * be something else (DEVELOPERS.md, "Measured").
 */
export const SCREEN_NEIGHBOUR_WAIT_MS = 60;

export async function nextForReviewer(deps: QueueDeps, scope: TeamScope, actor: Actor, input: { projectId: string; skipItemId?: string }): Promise<ReviewItemView | null> {
  const claimed = await traced('next.claim', () => claimNext(deps, scope, actor, input));
  if (!claimed) return null;
  // On PostgreSQL the claim statement read the item already (claim.ts `claimPostgres`).
  const view = claimed.view;
  return traced('next.view', () => (view ? reviewItemFromRow(deps, actor, input.projectId, view) : itemForReviewer(deps, scope, actor, input.projectId, claimed.itemId)));
}
