/**
 * Types of the streaming import's answer, for the browser (type-only: nothing of the server
 * modules is bundled).
 */
export type { ImportProblem } from '@/lib/server/import/problems';
export type { ImportOutcome } from '@/lib/server/import';
export type { ImportStreamLine as ImportStreamLineView } from '@/lib/server/import/http';
