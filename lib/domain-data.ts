/**
 * Shared vocabulary, limits and input schemas for the Data area: imports, exports and pipeline
 * tokens (client and server). Sibling of lib/domain.ts, same conventions: one zod schema per
 * input shape, messages that name the field and the limit.
 */
import { z } from 'zod';
import { IdSchema, LIMITS, tooLong } from './domain';

// ───────────────────────── limits ─────────────────────────

export const DATA_LIMITS = {
  /** Sample external id, in characters. */
  externalId: 256,
  /** Class label, in characters. */
  label: 100,
  /** Sample text shown to reviewers, in characters. */
  text: 20_000,
  /** Image URL or uploaded file name, in characters. */
  image: 2_048,
  /** Metadata: number of fields per sample, key length, value length. */
  metaFields: 50,
  metaKey: 64,
  metaValue: 2_000,
  /** A single CSV record or JSON line, in characters (guards against an unclosed quote). */
  record: 4_000_000,
  /** Feature-vector length. */
  maxFeatures: 8_192,
  /** Problems reported for a refused import. */
  problems: 20,
  /** Import file size, in bytes. */
  importBytes: 2 * 1024 * 1024 * 1024,
  /** Uploaded image size, in bytes. */
  imageBytes: 10 * 1024 * 1024,
  /** Pipeline token name, in characters. */
  tokenName: 80,
  /** Original file name kept in the import history, in characters. */
  fileName: 200,
  /** Live (not revoked) tokens per project. */
  tokensPerProject: 20,
} as const;

// ───────────────────────── vocabulary ─────────────────────────

export const IMPORT_MODES = ['insert', 'update'] as const;
export type ImportMode = (typeof IMPORT_MODES)[number];
export const IMPORT_MODE_SUMMARY: Readonly<Record<ImportMode, string>> = {
  insert: 'Add new samples. An id that already exists in the project is refused.',
  update: 'Add new samples and update existing ones (label, features, text, image, metadata).',
};

export const IMPORT_FORMATS = ['csv', 'jsonl'] as const;
export type ImportFormat = (typeof IMPORT_FORMATS)[number];

export const IMPORT_STATUSES = ['staged', 'queued', 'running', 'applied', 'failed'] as const;
export type ImportStatus = (typeof IMPORT_STATUSES)[number];

export const EXPORT_FORMATS = ['csv', 'jsonl', 'report'] as const;
export type ExportFormat = (typeof EXPORT_FORMATS)[number];

/** Secret pipeline tokens start with this text (helps secret scanners and people). */
export const TOKEN_SECRET_PREFIX = 'blp_';
/** Characters of the secret kept in clear to tell tokens apart (prefix included). */
export const TOKEN_DISPLAY_CHARS = 12;

// ───────────────────────── schemas ─────────────────────────

const FeaturePrefixSchema = z
  .string()
  .max(64, { error: tooLong('Feature prefix', 64) })
  .regex(/^[^\u0000-\u001f\u007f]*$/, { error: 'Feature prefix contains control characters.' })
  .optional();

/** Upload batch for images sent with an import: a random id chosen by the browser. */
export const UploadBatchSchema = z
  .string()
  .regex(/^[A-Za-z0-9_-]{16,64}$/, { error: 'The upload batch id is not valid.' });

const FileNameSchema = z
  .string()
  .max(DATA_LIMITS.fileName * 4, { error: tooLong('File name', DATA_LIMITS.fileName) })
  .transform((s) => s.replace(/[\u0000-\u001f\u007f]/g, '').trim().slice(0, DATA_LIMITS.fileName))
  .pipe(z.string());

/** Query of the streaming import route (the file itself is the request body). */
export const ImportQuery = z.object({
  projectId: IdSchema,
  mode: z.enum(IMPORT_MODES, { error: 'Choose a mode: insert or update.' }).default('insert'),
  featurePrefix: FeaturePrefixSchema,
  fileName: FileNameSchema.default('upload'),
  uploadBatch: UploadBatchSchema.optional(),
});
export type ImportQuery = z.infer<typeof ImportQuery>;

/** Query of the image upload route (the image is the request body). */
export const ImageUploadQuery = z.object({
  projectId: IdSchema,
  uploadBatch: UploadBatchSchema,
  name: z
    .string({ error: 'The image needs a file name.' })
    .min(1, { error: 'The image needs a file name.' })
    .max(DATA_LIMITS.image, { error: tooLong('Image file name', DATA_LIMITS.image) }),
});
export type ImageUploadQuery = z.infer<typeof ImageUploadQuery>;

/** Path of an uploaded image: /api/projects/<projectId>/images/<batch>/<file>. */
export const ImageFileQuery = z.object({
  projectId: IdSchema,
  path: z
    .array(z.string())
    .length(2, { error: 'Not found.' })
    .refine((p) => /^[A-Za-z0-9_-]{16,64}$/.test(p[0]) && /^[0-9a-f]{32}\.(png|jpg|gif|webp)$/.test(p[1]), {
      error: 'Not found.',
    }),
});
export type ImageFileQuery = z.infer<typeof ImageFileQuery>;

const BooleanFlag = z
  .union([z.boolean(), z.enum(['1', '0', 'true', 'false', 'yes', 'no', ''])])
  .transform((v) => v === true || v === '1' || v === 'true' || v === 'yes');

/** A revision number from a query string; an empty value (a blank form field) means "all". */
const SinceSchema = z.preprocess(
  (v) => (v === '' ? undefined : v),
  z.coerce
    .number({ error: 'since must be a revision number.' })
    .int({ error: 'since must be a whole revision number.' })
    .min(0, { error: 'since must be 0 or more.' })
    .max(1_000_000_000, { error: 'since is too large.' })
    .optional(),
);

/** Export download from the Data screen. */
export const ExportQuery = z.object({
  projectId: IdSchema,
  format: z.enum(EXPORT_FORMATS, { error: 'Choose a format: csv, jsonl or report.' }).default('csv'),
  features: BooleanFlag.default(false),
  since: SinceSchema,
});
export type ExportQuery = z.infer<typeof ExportQuery>;

/** Pipeline API: GET labels. */
export const LabelsQuery = z.object({
  projectId: IdSchema,
  format: z.enum(['jsonl', 'csv'], { error: 'Choose a format: jsonl or csv.' }).default('jsonl'),
  features: BooleanFlag.default(false),
  since: SinceSchema,
});
export type LabelsQuery = z.infer<typeof LabelsQuery>;

/** Pipeline API: GET revisions. */
export const RevisionsQuery = z.object({ projectId: IdSchema });
export type RevisionsQuery = z.infer<typeof RevisionsQuery>;

/** Pipeline API: POST samples (the body is the file). Default mode: update (add or update). */
export const SamplesQuery = z.object({
  projectId: IdSchema,
  mode: z.enum(IMPORT_MODES, { error: 'Choose a mode: insert or update.' }).default('update'),
  featurePrefix: FeaturePrefixSchema,
  fileName: FileNameSchema.default('pipeline'),
});
export type SamplesQuery = z.infer<typeof SamplesQuery>;

export const TokenNameSchema = z
  .string({ error: 'Give the token a name.' })
  .max(DATA_LIMITS.tokenName * 4, { error: tooLong('Token name', DATA_LIMITS.tokenName) })
  .transform((s) => s.normalize('NFC').replace(/\s+/g, ' ').trim())
  .pipe(
    z
      .string()
      .min(1, { error: 'Give the token a name.' })
      .max(DATA_LIMITS.tokenName, { error: tooLong('Token name', DATA_LIMITS.tokenName) })
      .refine((s) => !/[\u0000-\u001f\u007f]/.test(s), { error: 'Token name contains control characters.' }),
  );

export const CreatePipelineTokenInput = z.object({ projectId: IdSchema, name: TokenNameSchema });
export type CreatePipelineTokenInput = z.infer<typeof CreatePipelineTokenInput>;

export const RevokePipelineTokenInput = z.object({ tokenId: IdSchema });
export type RevokePipelineTokenInput = z.infer<typeof RevokePipelineTokenInput>;

/** A bearer secret as presented in the Authorization header. */
export const TokenSecretSchema = z
  .string()
  .min(TOKEN_SECRET_PREFIX.length + 16)
  .max(LIMITS.invitationToken)
  .regex(/^blp_[A-Za-z0-9_-]+$/);
