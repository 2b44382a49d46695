/**
 * The registry of every server action and route handler in the app.
 *
 * Every exported server action (app/actions/*.ts) and every route handler (app/**\/route.ts) is
 * a public endpoint: anyone can call it with any input. Each one is listed here with who may
 * call it and whether it changes team data; `defineAction` / `defineRoute` refuse to define an
 * endpoint that is missing here or declared differently, and test/server/authz-registry.test.ts
 * scans the folders, fails on anything unlisted, and calls every entry as a stranger, as a
 * member of another team and as an observer, expecting a refusal and an unchanged database.
 *
 * To add an action: create app/actions/<verb-noun>.ts ('use server', one exported async
 * function that calls a `defineAction(...)` wrapper), add its entry below under the same name,
 * and add a probe for it in the registry test (valid input aimed at the fixture team's
 * resources).
 *
 * access:
 *   public     no session needed (the action itself checks a capability, e.g. an invitation token)
 *   signed-in  any signed-in user; touches no existing team resource except via a capability
 *   member     any member (lead, reviewer, observer) of the team owning the resource
 *   reviewer   reviewer or lead of that team
 *   lead       lead of that team
 *   token      a pipeline token of the project in the URL (Authorization: Bearer; see
 *              lib/server/authz/token-route.ts); sessions are not accepted there
 * writes: true when the endpoint changes team-owned data (observers are refused those).
 */

export type Access = 'public' | 'signed-in' | 'member' | 'reviewer' | 'lead' | 'token';
export type HttpMethod = 'GET' | 'POST' | 'PUT' | 'PATCH' | 'DELETE';

export type ActionEntry = {
  kind: 'action';
  /** Path from the repository root. */
  file: string;
  /** The exported async function of that file. */
  exportName: string;
  access: Access;
  writes: boolean;
  summary: string;
};

export type RouteEntry = {
  kind: 'route';
  file: string;
  methods: readonly HttpMethod[];
  access: Access;
  writes: boolean;
  /**
   * defineRoute: goes through the wrapper. next-auth: the authentication endpoint itself
   * (CSRF-checked by next-auth; sign-in goes through our throttled `authorize`). static: answers
   * a constant and reads nothing. readiness: runs the readiness check (a trivial query and the
   * migrations record; lib/server/readiness.ts) and reads no team data.
   */
  via: 'defineRoute' | 'defineTokenRoute' | 'next-auth' | 'static' | 'readiness';
  summary: string;
};

export const REGISTRY = {
  // ── accounts and teams ──
  completeSetup: {
    kind: 'action',
    file: 'app/actions/complete-setup.ts',
    exportName: 'completeSetup',
    access: 'public',
    writes: true,
    summary: 'First run only: creates the first account and its team (as lead); refused once any account exists.',
  },
  signUp: {
    kind: 'action',
    file: 'app/actions/sign-up.ts',
    exportName: 'signUp',
    access: 'public',
    writes: true,
    summary: 'Creates an account from a valid invitation link and joins its team with the invited role.',
  },
  createTeam: {
    kind: 'action',
    file: 'app/actions/create-team.ts',
    exportName: 'createTeam',
    access: 'signed-in',
    writes: true,
    summary: 'Creates a new team with the caller as its lead.',
  },
  switchTeam: {
    kind: 'action',
    file: 'app/actions/switch-team.ts',
    exportName: 'switchTeam',
    access: 'member',
    writes: false,
    summary: "Makes one of the caller's teams the current one (a preference on the caller's own account).",
  },
  acceptInvitation: {
    kind: 'action',
    file: 'app/actions/accept-invitation.ts',
    exportName: 'acceptInvitation',
    access: 'signed-in',
    writes: true,
    summary: 'The signed-in user joins a team through a valid invitation link.',
  },
  // ── team management (lead) ──
  createInvitation: {
    kind: 'action',
    file: 'app/actions/create-invitation.ts',
    exportName: 'createInvitation',
    access: 'lead',
    writes: true,
    summary: 'Creates a single-use, expiring invitation link for a role.',
  },
  revokeInvitation: {
    kind: 'action',
    file: 'app/actions/revoke-invitation.ts',
    exportName: 'revokeInvitation',
    access: 'lead',
    writes: true,
    summary: 'Revokes a pending invitation.',
  },
  changeRole: {
    kind: 'action',
    file: 'app/actions/change-role.ts',
    exportName: 'changeRole',
    access: 'lead',
    writes: true,
    summary: "Changes a member's role (a team keeps at least one lead).",
  },
  removeMember: {
    kind: 'action',
    file: 'app/actions/remove-member.ts',
    exportName: 'removeMember',
    access: 'lead',
    writes: true,
    summary: 'Removes a member from the team (a team keeps at least one lead).',
  },

  // ── route handlers ──
  nextAuth: {
    kind: 'route',
    file: 'app/api/auth/[...nextauth]/route.ts',
    methods: ['GET', 'POST'],
    access: 'public',
    writes: true,
    via: 'next-auth',
    summary: 'Sign-in (throttled credentials check), session, CSRF token and sign-out, served by next-auth.',
  },
  health: {
    kind: 'route',
    file: 'app/api/health/route.ts',
    methods: ['GET'],
    access: 'public',
    writes: false,
    via: 'static',
    summary: 'Liveness: answers {status: "ok"}; reads nothing.',
  },
  ready: {
    kind: 'route',
    file: 'app/api/ready/route.ts',
    methods: ['GET'],
    access: 'public',
    writes: false,
    via: 'readiness',
    summary: 'Readiness: 200 when the database answers within 2 s and its migrations are current, else 503 with the reason; no team data.',
  },

  // ── Data area: imports, exports, pipeline tokens (lib/server/import, export, tokens.ts) ──
  createPipelineToken: {
    kind: 'action',
    file: 'app/actions/create-pipeline-token.ts',
    exportName: 'createPipelineToken',
    access: 'lead',
    writes: true,
    summary: "Creates a project's pipeline token; the secret is returned once and stored only as a hash.",
  },
  revokePipelineToken: {
    kind: 'action',
    file: 'app/actions/revoke-pipeline-token.ts',
    exportName: 'revokePipelineToken',
    access: 'lead',
    writes: true,
    summary: 'Revokes a pipeline token; calls with it are refused from then on.',
  },
  importData: {
    kind: 'route',
    file: 'app/api/projects/[projectId]/imports/route.ts',
    methods: ['POST'],
    access: 'lead',
    writes: true,
    via: 'defineRoute',
    summary: 'Streams an uploaded CSV / JSON Lines file into the project (all or nothing); answers with progress lines and the outcome.',
  },
  uploadImportImage: {
    kind: 'route',
    file: 'app/api/projects/[projectId]/imports/images/route.ts',
    methods: ['POST'],
    access: 'lead',
    writes: true,
    via: 'defineRoute',
    summary: 'Stores one image sent with an import (PNG, JPEG, GIF, WebP) under a generated name.',
  },
  exportData: {
    kind: 'route',
    file: 'app/api/projects/[projectId]/export/route.ts',
    methods: ['GET'],
    access: 'lead',
    writes: false,
    via: 'defineRoute',
    summary: 'Downloads the current labels with provenance (CSV or JSON Lines) or the audit report (JSON).',
  },
  projectImage: {
    kind: 'route',
    file: 'app/api/projects/[projectId]/images/[...path]/route.ts',
    methods: ['GET'],
    access: 'member',
    writes: false,
    via: 'defineRoute',
    summary: "Serves an image uploaded with one of the project's imports.",
  },
  apiSamples: {
    kind: 'route',
    file: 'app/api/v1/projects/[projectId]/samples/route.ts',
    methods: ['POST'],
    access: 'token',
    writes: true,
    via: 'defineTokenRoute',
    summary: 'Pipeline API: adds or updates samples from a CSV / JSON Lines body (all or nothing).',
  },
  apiLabels: {
    kind: 'route',
    file: 'app/api/v1/projects/[projectId]/labels/route.ts',
    methods: ['GET'],
    access: 'token',
    writes: false,
    via: 'defineTokenRoute',
    summary: 'Pipeline API: current labels with provenance, optionally only those changed since a revision.',
  },
  apiRevisions: {
    kind: 'route',
    file: 'app/api/v1/projects/[projectId]/revisions/route.ts',
    methods: ['GET'],
    access: 'token',
    writes: false,
    via: 'defineTokenRoute',
    summary: 'Pipeline API: the revisions of the project with their fit status and metrics.',
  },
  // ── Review queue and refits (lib/server/queue, lib/server/fits) ──
  claimNextItem: {
    kind: 'action',
    file: 'app/actions/claim-next-item.ts',
    exportName: 'claimNextItem',
    access: 'reviewer',
    writes: true,
    summary: "Leases the next queue item to the caller for 90 s (or renews the caller's lease) and returns it without any votes.",
  },
  castVote: {
    kind: 'action',
    file: 'app/actions/cast-vote.ts',
    exportName: 'castVote',
    access: 'reviewer',
    writes: true,
    summary: 'Records the caller\'s keep / relabel vote on a queue item; two agreeing votes close it, two different ones split it.',
  },
  withdrawVote: {
    kind: 'action',
    file: 'app/actions/withdraw-vote.ts',
    exportName: 'withdrawVote',
    access: 'reviewer',
    writes: true,
    summary: "Withdraws the caller's own vote within its 10 s undo window, unless the item has moved on.",
  },
  decideSplit: {
    kind: 'action',
    file: 'app/actions/decide-split.ts',
    exportName: 'decideSplit',
    access: 'lead',
    writes: true,
    summary: 'A lead who cast neither vote closes a split item as kept or relabelled.',
  },
  applyChanges: {
    kind: 'action',
    file: 'app/actions/apply-changes.ts',
    exportName: 'applyChanges',
    access: 'lead',
    writes: true,
    summary: 'Applies all agreed, pending relabels as one new revision and queues its refit.',
  },
  updateProjectSettings: {
    kind: 'action',
    file: 'app/actions/update-project-settings.ts',
    exportName: 'updateProjectSettings',
    access: 'lead',
    writes: true,
    summary: "Changes a project's fit and queue settings; queues a refit of the current revision when the fit is affected.",
  },
  queueStatus: {
    kind: 'route',
    file: 'app/api/projects/[projectId]/status/route.ts',
    methods: ['GET'],
    access: 'member',
    writes: false,
    via: 'defineRoute',
    summary: 'Fit status, queue progress by state, active reviewers and recent decisions; split items and pending changes for leads.',
  },
} as const satisfies Record<string, ActionEntry | RouteEntry>;

export type EndpointName = keyof typeof REGISTRY;
export type ActionName = { [K in EndpointName]: (typeof REGISTRY)[K] extends { kind: 'action' } ? K : never }[EndpointName];
export type RouteName = { [K in EndpointName]: (typeof REGISTRY)[K] extends { kind: 'route' } ? K : never }[EndpointName];

export type RegistryEntry = ActionEntry | RouteEntry;

export function registryEntries(): Array<[EndpointName, RegistryEntry]> {
  return Object.entries(REGISTRY) as Array<[EndpointName, RegistryEntry]>;
}
