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

/**
 * The reviewer screen's wait for a neighbour search that is not cached yet (QueueDeps.neighbourWaitMs):
 * one search of a 100k × 256 project takes 20–40 ms of a core, but when many reviewers ask at once
 * (a team starting together, the first requests after a refit reordered the queue) their searches
 * queue on one thread — in the team load test the first 20 simultaneous "next" took 0.8–1 s for
 * that alone. Past this wait the screen gets the item at once and fetches it again for its
 * neighbours (QueueScreen).
 */
export const SCREEN_NEIGHBOUR_WAIT_MS = 60;

export async function nextForReviewer(deps: QueueDeps, scope: TeamScope, actor: Actor, input: { projectId: string; skipItemId?: string }): Promise<ReviewItemView | null> {
  const claimed = await traced('next.claim', () => claimNext(deps, scope, actor, input));
  if (!claimed) return null;
  return traced('next.view', () => itemForReviewer(deps, scope, actor, input.projectId, claimed.itemId));
}
