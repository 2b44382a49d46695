/**
 * Review queue and fit settings: shared vocabulary and zod schemas (client and server).
 *
 * Kept apart from lib/domain.ts so the queue's inputs can change without touching the shared
 * schemas of accounts and teams. Messages name the field and the limit.
 */
import { z } from 'zod';
import { IdSchema, tooLong } from './domain';

// ───────────────────────── vocabulary ─────────────────────────

export const QUEUE_STATES = ['open', 'one-vote', 'split', 'closed'] as const;
export type QueueState = (typeof QUEUE_STATES)[number];

export const QUEUE_OUTCOMES = ['kept', 'relabelled'] as const;
export type QueueOutcome = (typeof QUEUE_OUTCOMES)[number];

export const VOTE_DECISIONS = ['keep', 'relabel'] as const;
export type VoteDecision = (typeof VOTE_DECISIONS)[number];

export const FIT_STATUSES = ['queued', 'running', 'done', 'failed', 'cancelled', 'superseded'] as const;
export type FitStatus = (typeof FIT_STATUSES)[number];

export const STANDING_FLAGS = ['wrong-side', 'inside-margin', 'near-boundary', 'pivot'] as const;
export type StandingFlag = (typeof STANDING_FLAGS)[number];

/** Timing rules of the queue (seconds). Documented in the reviewer screen's key help. */
export const QUEUE_TIMING = {
  /** A claimed item is reserved for its reviewer this long after each claim or renewal. */
  leaseSeconds: 90,
  /** A vote may be withdrawn by its author this long after it was cast (see lib/server/queue/vote.ts). */
  undoSeconds: 10,
} as const;

export const QUEUE_LIMITS = {
  note: 500,
  className: 100,
} as const;

// ───────────────────────── project settings ─────────────────────────

export const KERNELS = ['linear', 'rbf', 'poly'] as const;
export const SOLVERS = ['auto', 'smo', 'dcd'] as const;
export const SCALES = ['standard', 'l2', 'none'] as const;

const positive = (field: string, max: number) =>
  z
    .number({ error: `${field} must be a number.` })
    .finite({ error: `${field} must be a finite number.` })
    .gt(0, { error: `${field} must be greater than 0.` })
    .max(max, { error: `${field} must be at most ${max}.` });

const integer = (field: string, min: number, max: number) =>
  z
    .number({ error: `${field} must be a whole number.` })
    .int({ error: `${field} must be a whole number.` })
    .min(min, { error: `${field} must be at least ${min}.` })
    .max(max, { error: `${field} must be at most ${max}.` });

/**
 * The fit and queue settings of a project (Project.settings JSON). Every field has a default, so
 * any stored document — including `{}` or one written by an older version — parses to a complete
 * settings object. Unknown keys are kept by `mergeProjectSettings` (other features may store their
 * own keys in the same document).
 */
export const ProjectSettingsSchema = z.object({
  /** Kernel of the margin classifier. */
  kernel: z.enum(KERNELS, { error: 'Choose a kernel: linear, rbf or poly.' }).default('linear'),
  /** Soft-margin cost C (ignored when `autoSelect` picks C by cross-validation). */
  C: positive('C', 1e6).default(1),
  /** RBF / polynomial γ; null means 1 / (number of features). */
  gamma: positive('Gamma', 1e6).nullable().default(null),
  degree: integer('Degree', 1, 10).default(3),
  coef0: z.number().finite().min(-1e6).max(1e6).default(0),
  /** Pick C (and γ for RBF) by cross-validation on a log grid before each full fit. */
  autoSelect: z.boolean().default(false),
  /** auto: dual coordinate descent for the linear kernel on more than 1,000 samples, else SMO. */
  solver: z.enum(SOLVERS, { error: 'Choose a solver: auto, smo or dcd.' }).default('auto'),
  scale: z.enum(SCALES, { error: 'Choose a scaling: standard, l2 or none.' }).default('standard'),
  /** Folds of the out-of-fold margins. */
  folds: integer('Folds', 2, 10).default(5),
  seed: integer('Seed', 0, 2 ** 31 - 1).default(1),
  /** Near-boundary band, in margin half-widths: |f(x)| ≤ band. */
  nearBand: z.number().finite().min(0, { error: 'Near-boundary band must be at least 0.' }).max(5, { error: 'Near-boundary band must be at most 5.' }).default(0.5),
  /** Relative change of the margin width that makes a support vector a pivot. */
  pivotThreshold: z.number().finite().min(0, { error: 'Pivot threshold must be at least 0.' }).max(1, { error: 'Pivot threshold must be at most 1.' }).default(0.05),
  /** Most support vectors refitted per boundary to find pivots (0 turns pivots off). */
  pivotCap: integer('Pivot cap', 0, 500).default(50),
  /** Most items awaiting votes (open and one-vote) in the queue at once. */
  queueCap: integer('Queue cap', 1, 20000).default(300),
  /** Apply agreed relabels automatically once this many are pending (0: only when a lead applies). */
  applyEvery: integer('Apply rule', 0, 10000).default(10),
});
export type ProjectSettings = z.infer<typeof ProjectSettingsSchema>;

export const DEFAULT_PROJECT_SETTINGS: ProjectSettings = ProjectSettingsSchema.parse({});

/**
 * Reads a stored settings document. Invalid or missing fields fall back to their defaults one by
 * one (a bad stored value must not make the project unusable); the result is always complete.
 */
export function readProjectSettings(json: string | null | undefined): ProjectSettings {
  let raw: unknown = {};
  try {
    raw = json ? JSON.parse(json) : {};
  } catch {
    raw = {};
  }
  const obj = raw !== null && typeof raw === 'object' && !Array.isArray(raw) ? (raw as Record<string, unknown>) : {};
  const whole = ProjectSettingsSchema.safeParse(obj);
  if (whole.success) return whole.data;
  const out: Record<string, unknown> = {};
  for (const key of Object.keys(ProjectSettingsSchema.shape) as (keyof ProjectSettings)[]) {
    const one = ProjectSettingsSchema.shape[key].safeParse(obj[key]);
    out[key] = one.success ? one.data : DEFAULT_PROJECT_SETTINGS[key];
  }
  return out as ProjectSettings;
}

/** Writes `settings` over a stored document, keeping keys this schema does not know. */
export function mergeProjectSettings(json: string | null | undefined, settings: ProjectSettings): string {
  let raw: unknown = {};
  try {
    raw = json ? JSON.parse(json) : {};
  } catch {
    raw = {};
  }
  const base = raw !== null && typeof raw === 'object' && !Array.isArray(raw) ? (raw as Record<string, unknown>) : {};
  return JSON.stringify({ ...base, ...settings });
}

// ───────────────────────── inputs of the queue's server actions ─────────────────────────

const NoteSchema = z
  .string()
  .max(QUEUE_LIMITS.note * 4, { error: tooLong('Note', QUEUE_LIMITS.note) })
  .transform((s) => s.normalize('NFC').replace(/[\u0000-\u0008\u000b-\u001f\u007f]/g, '').trim())
  .pipe(z.string().max(QUEUE_LIMITS.note, { error: tooLong('Note', QUEUE_LIMITS.note) }))
  .optional();

const ClassNameSchema = z
  .string({ error: 'Choose a class.' })
  .min(1, { error: 'Choose a class.' })
  .max(QUEUE_LIMITS.className, { error: tooLong('Class', QUEUE_LIMITS.className) });

export const ClaimNextInput = z.object({
  projectId: IdSchema,
  /** Item to skip: its lease is released and it is not handed back in this claim. */
  skipItemId: IdSchema.optional(),
});
export type ClaimNextInput = z.infer<typeof ClaimNextInput>;

/** A vote: keep the current label, or relabel to a named class. */
export const VoteChoice = z.discriminatedUnion(
  'decision',
  [
    z.object({ decision: z.literal('keep'), note: NoteSchema }),
    z.object({ decision: z.literal('relabel'), label: ClassNameSchema, note: NoteSchema }),
  ],
  { error: 'Choose keep or relabel.' },
);
export type VoteChoice = z.infer<typeof VoteChoice>;

export const CastVoteInput = z.intersection(z.object({ projectId: IdSchema, itemId: IdSchema }), VoteChoice);
export type CastVoteInput = z.infer<typeof CastVoteInput>;

export const WithdrawVoteInput = z.object({ projectId: IdSchema, voteId: IdSchema });
export type WithdrawVoteInput = z.infer<typeof WithdrawVoteInput>;

export const DecideSplitInput = z.intersection(z.object({ projectId: IdSchema, itemId: IdSchema }), VoteChoice);
export type DecideSplitInput = z.infer<typeof DecideSplitInput>;

export const ApplyChangesInput = z.object({ projectId: IdSchema });
export type ApplyChangesInput = z.infer<typeof ApplyChangesInput>;

export const UpdateProjectSettingsInput = z.object({
  projectId: IdSchema,
  settings: ProjectSettingsSchema,
});
export type UpdateProjectSettingsInput = z.infer<typeof UpdateProjectSettingsInput>;

export const ProjectRefInput = z.object({ projectId: IdSchema });
export type ProjectRefInput = z.infer<typeof ProjectRefInput>;
