/**
 * Agreement among the reviewers of a project: Cohen's kappa for each pair of reviewers over the
 * queue items both voted on, the overall percent agreement over all such pairs of votes, the
 * original-versus-current label confusion, and votes per reviewer per day (UTC).
 *
 * A vote's rating is the label the reviewer says is right: `relabel` → its label, `keep` → the
 * sample's label at the item's revision (rebuilt from the LabelChange history).
 */
import { confusionMatrix, kappaOfPairs, pairedRatings, type Confusion } from '../../agreement';
import type { TeamScope } from '../authz/scope';
import type { Db } from '../db';
import { labelsAtRevision, scopedProject } from './labels';

export interface PairAgreement {
  readonly a: string;
  readonly b: string;
  readonly items: number;
  readonly percent: number | null;
  readonly kappa: number | null;
}

export interface ThroughputRow {
  readonly reviewer: string;
  readonly day: string;
  readonly votes: number;
}

export interface AgreementSummary {
  readonly pairs: readonly PairAgreement[];
  /** share of agreeing vote pairs over all reviewer pairs and shared items */
  readonly overallPercent: number | null;
  readonly votePairs: number;
  readonly confusion: Confusion;
  readonly throughput: readonly ThroughputRow[];
  readonly reviewers: readonly string[];
  readonly days: readonly string[];
}

export async function agreementSummary(client: Db, scope: TeamScope, projectId: string): Promise<AgreementSummary | null> {
  const project = await scopedProject(client, scope.teamId, projectId);
  if (!project) return null;
  const votes = await client.vote.findMany({
    where: { queueItem: { projectId } },
    select: { userId: true, decision: true, label: true, createdAt: true, queueItemId: true, user: { select: { name: true } }, queueItem: { select: { sampleId: true, revisionNumber: true } } },
  });
  const labelCache = new Map<number, Map<string, string>>();
  const labelAt = async (revision: number): Promise<Map<string, string>> => {
    let m = labelCache.get(revision);
    if (!m) {
      m = await labelsAtRevision(client, projectId, revision);
      labelCache.set(revision, m);
    }
    return m;
  };
  const ratings = new Map<string, { name: string; byItem: Map<string, string> }>();
  const throughput = new Map<string, number>();
  for (const v of votes) {
    const rating = v.decision === 'relabel' && v.label ? v.label : ((await labelAt(v.queueItem.revisionNumber)).get(v.queueItem.sampleId) ?? '');
    let r = ratings.get(v.userId);
    if (!r) {
      r = { name: v.user.name, byItem: new Map() };
      ratings.set(v.userId, r);
    }
    r.byItem.set(v.queueItemId, rating);
    const key = `${v.user.name}\u0000${v.createdAt.toISOString().slice(0, 10)}`;
    throughput.set(key, (throughput.get(key) ?? 0) + 1);
  }
  const raters = [...ratings.values()].sort((x, y) => x.name.localeCompare(y.name));
  const pairs: PairAgreement[] = [];
  let agree = 0;
  let total = 0;
  for (let i = 0; i < raters.length; i++) {
    for (let j = i + 1; j < raters.length; j++) {
      const shared = pairedRatings(raters[i].byItem, raters[j].byItem);
      if (shared.length === 0) continue;
      const k = kappaOfPairs(shared);
      pairs.push({ a: raters[i].name, b: raters[j].name, items: k.n, percent: k.observed, kappa: k.kappa });
      agree += shared.filter(([x, y]) => x === y).length;
      total += shared.length;
    }
  }
  const grouped = await client.sample.groupBy({ by: ['originalLabel', 'currentLabel'], where: { projectId }, _count: { _all: true } });
  const items: { original: string; final: string }[] = [];
  for (const g of grouped) for (let n = 0; n < g._count._all; n++) items.push({ original: g.originalLabel, final: g.currentLabel });
  const rows = [...throughput.entries()]
    .map(([key, n]) => {
      const [reviewer, day] = key.split('\u0000');
      return { reviewer, day, votes: n };
    })
    .sort((x, y) => x.day.localeCompare(y.day) || x.reviewer.localeCompare(y.reviewer));
  return {
    pairs,
    overallPercent: total > 0 ? agree / total : null,
    votePairs: total,
    confusion: confusionMatrix(items, project.classes.map((c) => c.name)),
    throughput: rows,
    reviewers: [...new Set(rows.map((r) => r.reviewer))].sort(),
    days: [...new Set(rows.map((r) => r.day))].sort(),
  };
}
