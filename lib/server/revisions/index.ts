/**
 * Revisions and the boundary in pictures — server data assembly (team-scoped: every entry point
 * takes the caller's TeamScope and answers null for another team's project).
 *
 *   revisionTimeline(db, scope, projectId)         per revision and boundary: margin width, hard-margin
 *                                                  verdict, support vectors, wrong-side / inside-margin
 *                                                  counts, hinge loss, out-of-fold accuracy, settings marks
 *   revisionDiff(db, scope, projectId, a, b)       samples whose label differs between two revisions
 *   agreementSummary(db, scope, projectId)         kappa per reviewer pair, percent agreement, confusion, throughput
 *   boundaryData(db, scope, projectId, k)          points of the Boundary screen for boundary k
 *   sampleDetail(db, scope, projectId, sampleId)   one sample for the detail panel
 */
export { revisionTimeline, settingsDiff, settingsSummary, verdictOf, type BoundaryMetrics, type RevisionRow, type Timeline, type FitSettingsSummary, type HardMarginVerdict } from './timeline';
export { revisionDiff, DIFF_LIMIT, type DiffEntry, type DiffVote, type RevisionDiff } from './diff';
export { agreementSummary, type AgreementSummary, type PairAgreement, type ThroughputRow } from './agreement';
export { boundaryData, sampleDetail, type BoundaryChoice, PF_INSIDE_MARGIN, PF_NEAR, PF_PIVOT, PF_WRONG_SIDE, type BoundaryData, type BoundaryPoint, type BoundaryResult, type SampleDetail } from './boundary';
export { labelsAtRevision } from './labels';
