/**
 * Export of a project's current labels with their provenance, as CSV or JSON Lines, streamed
 * page by page in external-id order (memory does not grow with the project).
 *
 * Per sample: id, current label, original label, the revision where the current label was set,
 * the revision where the sample was added, and the votes that decided the label — the votes of
 * the review that relabelled it, or, when the label was never changed, of the latest review
 * that kept it (`decided_by` names a lead who broke a tie). Optionally text, image, metadata and
 * the feature vector, so that an export can be imported again unchanged (features are written
 * as the shortest decimals that read back to the same float32).
 *
 * CSV: RFC 4180, CRLF line ends, every text cell quoted; text cells that a spreadsheet would run
 * as a formula are neutralised (OWASP "CSV Injection": a leading apostrophe before = + - @ tab
 * CR), which the importer reverses. Numbers we format ourselves are written bare.
 */
import { csvTextCell, PROVENANCE_COLUMNS } from '../../data-columns';
import { notFound } from '../authz/errors';
import type { TeamScope } from '../authz/scope';
import { db, type Db } from '../db';
import { decodeFeatures } from '../features';
import { IN_LIST_LIMIT } from '../import/apply';
import { formatFloat32 } from '../import/numbers';

export type LabelsFormat = 'csv' | 'jsonl';

export interface LabelsExportOptions {
  format: LabelsFormat;
  /** Include text, image, metadata and features (what a re-import needs). */
  features?: boolean;
  /** Only samples whose label was set or that were added after this revision. */
  since?: number;
  client?: Db;
  pageSize?: number;
}

export interface VoteRecord {
  voter: string;
  decision: string;
  label: string | null;
}

export interface LabelRecord {
  id: string;
  label: string;
  original_label: string;
  label_revision: number;
  added_revision: number;
  votes: VoteRecord[];
  decided_by: string | null;
  text?: string | null;
  image?: string | null;
  meta?: Record<string, unknown>;
  /** Present in full exports (written as JSON numbers). */
  features?: number[];
}

type SampleRow = {
  id: string;
  externalId: string;
  originalLabel: string;
  currentLabel: string;
  labelRevision: number;
  addedRevision: number;
  text: string | null;
  imageRef: string | null;
  metadata: string | null;
  features: Uint8Array;
};

function parseMeta(json: string | null): Record<string, unknown> {
  if (json === null || json === '') return {};
  try {
    const v: unknown = JSON.parse(json);
    return v !== null && typeof v === 'object' && !Array.isArray(v) ? (v as Record<string, unknown>) : {};
  } catch {
    return {};
  }
}

/** The project (in scope) or 404. */
async function projectInScope(client: Db, scope: TeamScope, projectId: string) {
  const project = await client.project.findFirst({
    where: { id: projectId, teamId: scope.teamId },
    select: { id: true, name: true, featureCount: true },
  });
  if (project === null) throw notFound();
  return project;
}

/**
 * The votes that decided each sample's current label, for one page of samples.
 * Returns sampleId → { votes, decidedBy }.
 */
async function provenanceOf(client: Db, samples: SampleRow[]): Promise<Map<string, { votes: VoteRecord[]; decidedBy: string | null }>> {
  const out = new Map<string, { votes: VoteRecord[]; decidedBy: string | null }>();
  if (samples.length > IN_LIST_LIMIT) {
    for (let i = 0; i < samples.length; i += IN_LIST_LIMIT) {
      for (const [k, v] of await provenanceOf(client, samples.slice(i, i + IN_LIST_LIMIT))) out.set(k, v);
    }
    return out;
  }
  if (samples.length === 0) return out;
  const ids = samples.map((s) => s.id);
  const labelRevision = new Map(samples.map((s) => [s.id, s.labelRevision]));
  const changes = await client.labelChange.findMany({
    where: { sampleId: { in: ids }, queueItemId: { not: null } },
    select: { sampleId: true, revisionNumber: true, queueItemId: true },
  });
  const itemOf = new Map<string, string>();
  for (const c of changes) {
    if (c.queueItemId !== null && c.revisionNumber === labelRevision.get(c.sampleId)) itemOf.set(c.sampleId, c.queueItemId);
  }
  // Labels never changed by review: the latest closed review that kept the label.
  const kept = await client.queueItem.findMany({
    where: { sampleId: { in: ids.filter((id) => !itemOf.has(id)) }, state: 'closed', outcome: 'kept' },
    select: { id: true, sampleId: true, closedAt: true, round: true },
    orderBy: [{ round: 'asc' }],
  });
  for (const k of kept) itemOf.set(k.sampleId, k.id); // ascending rounds: the last one wins
  const itemIds = [...new Set(itemOf.values())]; // at most one per sample, so within the limit
  if (itemIds.length === 0) return out;
  const items = await client.queueItem.findMany({
    where: { id: { in: itemIds } },
    select: {
      id: true,
      tiebreakBy: { select: { email: true } },
      votes: { select: { decision: true, label: true, createdAt: true, user: { select: { email: true } } }, orderBy: { createdAt: 'asc' } },
    },
  });
  const byItem = new Map(items.map((i) => [i.id, i]));
  for (const [sampleId, itemId] of itemOf) {
    const item = byItem.get(itemId);
    if (!item) continue;
    out.set(sampleId, {
      votes: item.votes.map((v) => ({ voter: v.user.email, decision: v.decision, label: v.label })),
      decidedBy: item.tiebreakBy?.email ?? null,
    });
  }
  return out;
}

async function metaKeysOf(client: Db, projectId: string, since: number | undefined): Promise<string[]> {
  const keys = new Set<string>();
  let cursor: string | undefined;
  for (;;) {
    const rows = await client.sample.findMany({
      where: { projectId, metadata: { not: null }, ...(since === undefined ? {} : { labelRevision: { gt: since } }) },
      select: { id: true, metadata: true },
      orderBy: { id: 'asc' },
      take: 5000,
      ...(cursor === undefined ? {} : { cursor: { id: cursor }, skip: 1 }),
    });
    for (const r of rows) for (const k of Object.keys(parseMeta(r.metadata))) keys.add(k);
    if (rows.length < 5000) break;
    cursor = rows[rows.length - 1].id;
  }
  return [...keys];
}

function votesCell(votes: VoteRecord[]): string {
  return votes.map((v) => [v.voter, v.decision, v.label ?? ''].filter((x) => x !== '').join(' ')).join('; ');
}

function metaCell(value: unknown): string {
  if (value === undefined || value === null) return '';
  return typeof value === 'string' ? value : JSON.stringify(value);
}

/** The export as text chunks (one per page of samples). */
export async function* exportLabels(scope: TeamScope, projectId: string, options: LabelsExportOptions): AsyncGenerator<string> {
  const client = options.client ?? db();
  const project = await projectInScope(client, scope, projectId);
  const full = options.features === true;
  const pageSize = options.pageSize ?? IN_LIST_LIMIT;
  const since = options.since;
  const metaKeys = full ? await metaKeysOf(client, projectId, since) : [];
  const d = project.featureCount;

  if (options.format === 'csv') {
    const header = ['id', 'label', ...PROVENANCE_COLUMNS];
    if (full) {
      header.push('text', 'image', ...metaKeys.map((k) => `meta.${k}`));
      for (let j = 0; j < d; j++) header.push(`f${j}`);
    }
    yield `${header.map((h) => csvTextCell(h)).join(',')}\r\n`;
  }

  // Keyset pagination in external-id order (the database's own string order).
  let after: string | undefined;
  for (;;) {
    const rows: SampleRow[] = await client.sample.findMany({
      where: {
        projectId,
        ...(since === undefined ? {} : { labelRevision: { gt: since } }),
        ...(after === undefined ? {} : { externalId: { gt: after } }),
      },
      select: {
        id: true,
        externalId: true,
        originalLabel: true,
        currentLabel: true,
        labelRevision: true,
        addedRevision: true,
        text: full,
        imageRef: full,
        metadata: full,
        features: full,
      },
      orderBy: { externalId: 'asc' },
      take: pageSize,
    });
    if (rows.length === 0) break;
    const provenance = await provenanceOf(client, rows);
    let chunk = '';
    for (const s of rows) {
      const p = provenance.get(s.id) ?? { votes: [], decidedBy: null };
      if (options.format === 'csv') {
        const cells = [
          csvTextCell(s.externalId),
          csvTextCell(s.currentLabel),
          csvTextCell(s.originalLabel),
          String(s.labelRevision),
          String(s.addedRevision),
          csvTextCell(votesCell(p.votes)),
          csvTextCell(p.decidedBy ?? ''),
        ];
        if (full) {
          cells.push(csvTextCell(s.text ?? ''), csvTextCell(s.imageRef ?? ''));
          const meta = parseMeta(s.metadata);
          for (const k of metaKeys) cells.push(csvTextCell(metaCell(meta[k])));
          const f = decodeFeatures(s.features, d);
          for (let j = 0; j < f.length; j++) cells.push(formatFloat32(f[j]));
        }
        chunk += `${cells.join(',')}\r\n`;
      } else {
        const record: LabelRecord = {
          id: s.externalId,
          label: s.currentLabel,
          original_label: s.originalLabel,
          label_revision: s.labelRevision,
          added_revision: s.addedRevision,
          votes: p.votes,
          decided_by: p.decidedBy,
        };
        if (!full) {
          chunk += `${JSON.stringify(record)}\n`;
          continue;
        }
        record.text = s.text;
        record.image = s.imageRef;
        record.meta = parseMeta(s.metadata);
        // Features written by hand: the shortest text that reads back to the same float32, and
        // "-0" kept (JSON.stringify would turn -0 into 0).
        const f = decodeFeatures(s.features, d);
        const values = new Array<string>(f.length);
        for (let j = 0; j < f.length; j++) values[j] = formatFloat32(f[j]);
        const json = JSON.stringify(record);
        chunk += `${json.slice(0, -1)},"features":[${values.join(',')}]}\n`;
      }
    }
    yield chunk;
    if (rows.length < pageSize) break;
    after = rows[rows.length - 1].externalId;
  }
}

/** A text generator as a byte stream for a Response body (pulls one chunk per read). */
export function textStream(chunks: AsyncIterable<string>): ReadableStream<Uint8Array> {
  const encoder = new TextEncoder();
  const iterator = chunks[Symbol.asyncIterator]();
  return new ReadableStream<Uint8Array>({
    async pull(controller) {
      try {
        const next = await iterator.next();
        if (next.done) controller.close();
        else controller.enqueue(encoder.encode(next.value));
      } catch (error) {
        console.error('[export] stream failed', error);
        controller.error(new Error('The export stopped because of an error on our side.'));
      }
    },
    async cancel() {
      await iterator.return?.(undefined);
    },
  });
}

/** A file name for downloads: the project name reduced to safe characters. */
export function exportFileName(projectName: string, suffix: string): string {
  const base = projectName
    .normalize('NFKD')
    .replace(/[^A-Za-z0-9._-]+/g, '-')
    .replace(/^-+|-+$/g, '')
    .slice(0, 60);
  return `${base || 'project'}-${suffix}`;
}
