/**
 * Background threads (refit engine, neighbour prefetch, standings writer on PostgreSQL) ask the OS
 * for a lower priority, so the threads serving requests win the CPU when both want it. On Linux,
 * setpriority(PRIO_PROCESS, 0) applies to the calling thread only (threads are scheduled as
 * tasks). No project imports: worker entries load this without the ORM.
 */
import { setPriority } from 'node:os';

/** Sets the calling thread's nice value; where that is refused, the thread keeps the normal priority (false). */
export function lowerThreadPriority(nice: number): boolean {
  try {
    setPriority(0, nice);
    return true;
  } catch {
    return false;
  }
}
