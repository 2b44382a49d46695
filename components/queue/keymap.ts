/**
 * The reviewer screen's keys. One table drives both the key handler and the "?" help panel, so
 * the documentation cannot drift from the behaviour.
 */
export type KeyAction = 'keep' | 'relabel' | 'note' | 'undo' | 'skip' | 'help' | 'close';

export interface KeyBinding {
  /** What the help panel shows in the key cap. */
  readonly keys: string;
  readonly action: KeyAction;
  readonly description: string;
}

export const KEY_BINDINGS: readonly KeyBinding[] = [
  { keys: 'K', action: 'keep', description: 'Keep the current label.' },
  { keys: '1 – 9', action: 'relabel', description: 'Relabel to the class with that number (the number of the current class keeps it).' },
  { keys: 'N', action: 'note', description: 'Write a note with your vote; Esc returns to the keys.' },
  { keys: 'U', action: 'undo', description: 'Withdraw your last vote while its 10-second undo window is open.' },
  { keys: 'S', action: 'skip', description: 'Skip this item; it goes back to the queue for someone else.' },
  { keys: '?', action: 'help', description: 'Show or hide this list.' },
  { keys: 'Esc', action: 'close', description: 'Close this list, or leave the note field.' },
];

/** Maps a keyboard event key to an action (digits carry their class number). */
export function actionForKey(key: string): { action: KeyAction; classNumber?: number } | null {
  if (key === '?') return { action: 'help' };
  if (key === 'Escape') return { action: 'close' };
  const k = key.length === 1 ? key.toLowerCase() : key;
  if (k === 'k') return { action: 'keep' };
  if (k === 'n') return { action: 'note' };
  if (k === 'u') return { action: 'undo' };
  if (k === 's') return { action: 'skip' };
  if (/^[1-9]$/.test(k)) return { action: 'relabel', classNumber: Number(k) };
  return null;
}
