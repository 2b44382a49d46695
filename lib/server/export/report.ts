/**
 * The audit report of a project (JSON): what the labels looked like at each revision, what the
 * boundary fits measured, and how far the reviewers agreed.
 *
 * Agreement: for every review item with at least two votes, the first two votes agree when
 * both keep, or both relabel to the same class. Percent agreement = agreeing pairs / pairs ×
 * 100. Cohen's kappa needs a fixed pair of raters: `agreement.cohensKappa` stays null and
 * `reviewerPairs` gives kappa for each pair of reviewers over the items both voted on (from
 * lib/server/revisions/agreement.ts: a vote's rating is the label the reviewer says is right).
 */
import { notFound } from '../authz/errors';
import type { TeamScope } from '../authz/scope';
import { db, type Db } from '../db';
import { agreementSummary } from '../revisions/agreement';

export const REPORT_FORMAT_VERSION = 1;

export interface RevisionReport {
  number: number;
  kind: string;
  note: string;
  createdAt: string;
  createdBy: string | null;
  /** Samples whose label was set in this revision (added or changed). */
  changeCount: number;
  /** Label changes recorded in this revision (from → to). */
  labelChanges: number;
  fit: {
    id: string;
    status: string;
    formulation: string | null;
    finishedAt: string | null;
    /** Fit.metrics as stored by the fit worker (margin width, violations, …), or null. */
    metrics: unknown;
  } | null;
}

export interface AgreementReport {
  /** Review items closed so far. */
  itemsClosed: number;
  /** Items with at least two votes (the pairs compared). */
  pairs: number;
  agreeingPairs: number;
  /** Percent of pairs that agree, or null without pairs. */
  percentAgreement: number | null;
  votes: { total: number; keep: number; relabel: number };
  outcomes: { kept: number; relabelled: number };
  /** Items closed by a lead's tiebreak after a split. */
  tiebreaks: number;
  /** Items waiting for a tiebreak now. */
  splitOpen: number;
  cohensKappa: number | null;
}

export interface AuditReport {
  format: 'borderline-audit-report';
  version: number;
  generatedAt: string;
  project: {
    id: string;
    name: string;
    featureCount: number;
    currentRevision: number;
    samples: number;
    /** Samples whose current label differs from the imported one. */
    relabelledSinceImport: number;
    classes: { name: string; samples: number }[];
  };
  revisions: RevisionReport[];
  agreement: AgreementReport;
  /** Cohen's kappa and percent agreement (0–100) per pair of reviewers, over the items both voted on. */
  reviewerPairs: { a: string; b: string; items: number; percentAgreement: number | null; cohensKappa: number | null }[];
}

function parseJson(text: string | null): unknown {
  if (text === null) return null;
  try {
    return JSON.parse(text) as unknown;
  } catch {
    return null;
  }
}

/** The revisions of a project with the fit of each (newest finished, else newest of any status). */
export async function revisionsWithFits(scope: TeamScope, projectId: string, options: { client?: Db } = {}): Promise<RevisionReport[]> {
  const client = options.client ?? db();
  const project = await client.project.findFirst({ where: { id: projectId, teamId: scope.teamId }, select: { id: true } });
  if (project === null) throw notFound();
  const [revisions, changeCounts, fits] = await Promise.all([
    client.revision.findMany({
      where: { projectId },
      orderBy: { number: 'asc' },
      select: { number: true, kind: true, note: true, createdAt: true, changeCount: true, createdBy: { select: { email: true } } },
    }),
    client.labelChange.groupBy({ by: ['revisionNumber'], where: { projectId }, _count: { _all: true } }),
    client.fit.findMany({
      where: { projectId },
      orderBy: { createdAt: 'asc' },
      select: { id: true, revisionNumber: true, status: true, formulation: true, finishedAt: true, metrics: true },
    }),
  ]);
  const changesPerRevision = new Map(changeCounts.map((c) => [c.revisionNumber, c._count._all]));
  const fitOf = new Map<number, (typeof fits)[number]>();
  for (const f of fits) {
    const current = fitOf.get(f.revisionNumber);
    if (current === undefined || f.status === 'done' || current.status !== 'done') fitOf.set(f.revisionNumber, f);
  }
  return revisions.map((r) => {
    const f = fitOf.get(r.number);
    return {
      number: r.number,
      kind: r.kind,
      note: r.note,
      createdAt: r.createdAt.toISOString(),
      createdBy: r.createdBy?.email ?? null,
      changeCount: r.changeCount,
      labelChanges: changesPerRevision.get(r.number) ?? 0,
      fit:
        f === undefined
          ? null
          : { id: f.id, status: f.status, formulation: f.formulation, finishedAt: f.finishedAt?.toISOString() ?? null, metrics: parseJson(f.metrics) },
    };
  });
}

export async function auditReport(scope: TeamScope, projectId: string, options: { client?: Db; now?: Date } = {}): Promise<AuditReport> {
  const client = options.client ?? db();
  const project = await client.project.findFirst({
    where: { id: projectId, teamId: scope.teamId },
    select: { id: true, name: true, featureCount: true, currentRevision: true },
  });
  if (project === null) throw notFound();

  const [classes, counts, sampleCount, relabelled, revisions, items, votes] = await Promise.all([
    client.projectClass.findMany({ where: { projectId }, orderBy: { position: 'asc' }, select: { name: true } }),
    client.sample.groupBy({ by: ['currentLabel'], where: { projectId }, _count: { _all: true } }),
    client.sample.count({ where: { projectId } }),
    client.sample.count({ where: { projectId, NOT: { currentLabel: { equals: client.sample.fields.originalLabel } } } }),
    revisionsWithFits(scope, projectId, { client }),
    client.queueItem.findMany({ where: { projectId }, select: { id: true, state: true, outcome: true, tiebreakById: true } }),
    client.vote.findMany({
      where: { queueItem: { projectId } },
      select: { queueItemId: true, decision: true, label: true, createdAt: true },
      orderBy: { createdAt: 'asc' },
    }),
  ]);

  const perClass = new Map(counts.map((c) => [c.currentLabel, c._count._all]));
  const byItem = new Map<string, { decision: string; label: string | null }[]>();
  for (const v of votes) {
    const list = byItem.get(v.queueItemId) ?? [];
    list.push({ decision: v.decision, label: v.label });
    byItem.set(v.queueItemId, list);
  }
  let pairs = 0;
  let agreeing = 0;
  for (const list of byItem.values()) {
    if (list.length < 2) continue;
    pairs++;
    const [a, b] = list;
    if (a.decision === b.decision && (a.decision === 'keep' || a.label === b.label)) agreeing++;
  }
  const closed = items.filter((i) => i.state === 'closed');
  const agreement: AgreementReport = {
    itemsClosed: closed.length,
    pairs,
    agreeingPairs: agreeing,
    percentAgreement: pairs === 0 ? null : Math.round((agreeing / pairs) * 10000) / 100,
    votes: {
      total: votes.length,
      keep: votes.filter((v) => v.decision === 'keep').length,
      relabel: votes.filter((v) => v.decision === 'relabel').length,
    },
    outcomes: {
      kept: closed.filter((i) => i.outcome === 'kept').length,
      relabelled: closed.filter((i) => i.outcome === 'relabelled').length,
    },
    tiebreaks: closed.filter((i) => i.tiebreakById !== null).length,
    splitOpen: items.filter((i) => i.state === 'split').length,
    cohensKappa: null,
  };

  return {
    format: 'borderline-audit-report',
    version: REPORT_FORMAT_VERSION,
    generatedAt: (options.now ?? new Date()).toISOString(),
    project: {
      id: project.id,
      name: project.name,
      featureCount: project.featureCount,
      currentRevision: project.currentRevision,
      samples: sampleCount,
      relabelledSinceImport: relabelled,
      classes: classes.map((c) => ({ name: c.name, samples: perClass.get(c.name) ?? 0 })),
    },
    revisions,
    agreement,
    reviewerPairs: ((await agreementSummary(client, scope, projectId))?.pairs ?? []).map((p) => ({
      a: p.a,
      b: p.b,
      items: p.items,
      percentAgreement: p.percent === null ? null : Math.round(p.percent * 10000) / 100,
      cohensKappa: p.kappa,
    })),
  };
}
