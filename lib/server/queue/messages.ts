/**
 * The queue's refusals, worded for the reviewer at the keyboard. Tests assert these sentences
 * literally; change them together with test/server/queue-consensus.test.ts.
 */
export const QUEUE_MESSAGES = {
  observerVote: 'Observers can read the queue but cannot vote.',
  votedTwice: 'You have already voted on this item; the second vote must come from another reviewer.',
  bothVotes: 'You cast one of the two votes on this item, so another lead must decide it.',
  closed: 'This item is already closed; no more votes are taken.',
  split: 'The two votes on this item disagree; it now waits for a lead to decide.',
  notSplit: 'Only a split item can be decided by a lead.',
  leaseTaken: 'Another reviewer is working on this item right now. Take the next one.',
  undoExpired: 'The undo window for this vote has passed.',
  undoAdvanced: 'This vote can no longer be withdrawn: the item has moved on since.',
  undoApplied: 'This relabel has already been applied to a revision and can no longer be withdrawn.',
  notYourVote: 'You can only withdraw your own vote.',
  sameLabel: 'To keep the current label, vote keep instead of relabel.',
  unknownClass: (label: string) => `"${label}" is not a class of this project.`,
  leadOnlyApply: 'Only a lead can apply changes.',
  leadOnlyDecide: 'Only a lead can decide a split item.',
  leadOnlySettings: 'Only a lead can change the project settings.',
  itemGone: 'This item has left the queue after a refit. Take the next one.',
} as const;
