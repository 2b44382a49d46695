// Every server action and route handler is a public endpoint (DESIGN.md §3). This test walks the
// registry (lib/server/authz/registry.ts), calls each endpoint as
//   (a) nobody (no session),
//   (b) a member of another team,
//   (c) an observer of the owning team, where the endpoint writes,
//   (d) a reviewer of the owning team, where a lead is required,
// and expects a refusal (401 / 403 / 404 — never 500) with the whole database unchanged (every
// row of every table, read with the raw driver). It also scans app/ so that an action or route
// that is not in the registry — or a registry entry without a probe here — fails the test, and
// checks that each probe is a real request by running it once as an allowed caller.

import { readdirSync, readFileSync, statSync } from 'node:fs';
import { join, relative } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { z } from 'zod';
import type { ActionResult } from '@/lib/domain';
import { defineAction } from '@/lib/server/authz/define';
import { registryEntries, type ActionEntry, type EndpointName, type RouteEntry } from '@/lib/server/authz/registry';
import { snapshot } from './db-harness';
import { buildFixture, call, contextFor, openAppDatabase, sessionFor, type AppDatabase, type Fixture } from './auth-harness';

const ROOT = fileURLToPath(new URL('../..', import.meta.url)).replace(/\/$/, '');

// ───────────────────────── probes: one valid request per endpoint ─────────────────────────

type Caller = 'leadA' | 'reviewerA' | 'observerA' | 'leadB';

type ActionProbe = {
  /** A well-formed request aimed at team A's resources. */
  input: (f: Fixture) => unknown;
  /** Who may make it (used once to prove the probe is a real request). */
  allowed: Caller | 'none';
  /**
   * For public and signed-in endpoints, which have no team resource to refuse on: a hostile
   * variant (a withdrawn capability, a finished set-up) that must be refused with `expect`.
   */
  hostile?: { input: (f: Fixture) => unknown; expect: number };
  /** Why cases (b)/(c) do not apply, when the endpoint cannot address another team at all. */
  notTeamScoped?: string;
};

const GOOD_PASSWORD = 'sea-glass-harbour-19';

const ACTION_PROBES: Record<string, ActionProbe> = {
  completeSetup: {
    input: () => ({ teamName: 'Takeover', name: 'Mallory', email: 'mallory@example.org', password: GOOD_PASSWORD }),
    allowed: 'none', // only on a fresh install; test/server/invitation.test.ts covers that case
    hostile: {
      input: () => ({ teamName: 'Takeover', name: 'Mallory', email: 'mallory@example.org', password: GOOD_PASSWORD }),
      expect: 409,
    },
  },
  signUp: {
    input: (f) => ({ token: f.invitationA.token, name: 'Nell New', email: 'nell@example.org', password: GOOD_PASSWORD }),
    allowed: 'none',
    hostile: {
      input: (f) => ({ token: f.revokedInvitationA.token, name: 'Mallory', email: 'mallory@example.org', password: GOOD_PASSWORD }),
      expect: 409,
    },
  },
  createTeam: {
    input: () => ({ name: 'Mallory & Co' }),
    allowed: 'leadB',
    notTeamScoped: 'creates a new team owned by the caller; its input names no existing team',
  },
  acceptInvitation: {
    input: (f) => ({ token: f.invitationA.token }),
    allowed: 'leadB', // the link is the capability: anyone holding it may join
    hostile: { input: (f) => ({ token: f.revokedInvitationA.token }), expect: 409 },
  },
  switchTeam: { input: (f) => ({ teamId: f.teamA }), allowed: 'observerA' },
  createInvitation: { input: (f) => ({ teamId: f.teamA, role: 'lead', expiresInHours: 24 }), allowed: 'leadA' },
  revokeInvitation: { input: (f) => ({ invitationId: f.invitationA.id }), allowed: 'leadA' },
  changeRole: { input: (f) => ({ membershipId: f.membershipReviewerA, role: 'lead' }), allowed: 'leadA' },
  removeMember: { input: (f) => ({ membershipId: f.membershipReviewerA }), allowed: 'leadA' },
  createPipelineToken: { input: (f) => ({ projectId: f.projectA, name: 'nightly embeddings' }), allowed: 'leadA' },
  revokePipelineToken: { input: (f) => ({ tokenId: f.tokenA.id }), allowed: 'leadA' },
  // Review queue (the fixture's project has no queue items: "next" answers { item: null }; votes and
  // decisions on a made-up item get through the wrapper and are then refused as not found, so
  // their allowed-caller runs are covered by test/server/queue-actions.test.ts instead).
  claimNextItem: { input: (f) => ({ projectId: f.projectA }), allowed: 'reviewerA' },
  castVote: { input: (f) => ({ projectId: f.projectA, itemId: 'probe-item', decision: 'keep' }), allowed: 'none' },
  withdrawVote: { input: (f) => ({ projectId: f.projectA, voteId: 'probe-vote' }), allowed: 'none' },
  decideSplit: { input: (f) => ({ projectId: f.projectA, itemId: 'probe-item', decision: 'relabel', label: 'right' }), allowed: 'none' },
  applyChanges: { input: (f) => ({ projectId: f.projectA }), allowed: 'leadA' },
  updateProjectSettings: {
    input: (f) => ({ projectId: f.projectA, settings: { kernel: 'linear', C: 2, scale: 'standard', queueCap: 50, applyEvery: 5 } }),
    allowed: 'leadA',
  },
};

type RouteProbe = {
  method: string;
  params: (f: Fixture) => Record<string, string | string[]>;
  body?: (f: Fixture) => unknown;
  /** Query string of the request (routes that stream their body take their input from it). */
  query?: (f: Fixture) => Record<string, string>;
  /** Raw body text instead of JSON (uploads). */
  rawBody?: string;
};
const CSV_BODY = 'id,label,x,y\nprobe-1,left,0.5,-1\n';
const ROUTE_PROBES: Record<string, RouteProbe> = {
  health: { method: 'GET', params: () => ({}) },
  ready: { method: 'GET', params: () => ({}) },
  importData: { method: 'POST', params: (f) => ({ projectId: f.projectA }), query: () => ({ fileName: 'probe.csv' }), rawBody: CSV_BODY },
  uploadImportImage: {
    method: 'POST',
    params: (f) => ({ projectId: f.projectA }),
    query: () => ({ uploadBatch: 'probe-batch-0123456789', name: 'cat.png' }),
    rawBody: '\u0089PNG\r\n\u001a\n0000',
  },
  exportData: { method: 'GET', params: (f) => ({ projectId: f.projectA }), query: () => ({ format: 'csv' }) },
  projectImage: {
    method: 'GET',
    params: (f) => ({ projectId: f.projectA, path: ['probe-batch-0123456789', `${'0'.repeat(32)}.png`] }),
  },
  // Pipeline API (access "token"): called with bearer tokens instead of sessions, see below.
  apiSamples: { method: 'POST', params: (f) => ({ projectId: f.projectA }), rawBody: CSV_BODY },
  apiLabels: { method: 'GET', params: (f) => ({ projectId: f.projectA }) },
  apiRevisions: { method: 'GET', params: (f) => ({ projectId: f.projectA }) },
  queueStatus: { method: 'GET', params: (f) => ({ projectId: f.projectA }) },
};
/** Route entries served by next-auth itself: not callable outside Next's request scope. */
const NEXT_AUTH_ROUTES = new Set(['nextAuth']);

// ───────────────────────── helpers ─────────────────────────

function walk(dir: string, out: string[] = []): string[] {
  for (const name of readdirSync(dir)) {
    if (name === 'node_modules' || name.startsWith('.')) continue;
    const p = join(dir, name);
    if (statSync(p).isDirectory()) walk(p, out);
    else out.push(p);
  }
  return out;
}

const rel = (p: string) => relative(ROOT, p).split('\\').join('/');

type ActionFn = (input: unknown) => Promise<ActionResult<unknown>>;
type RouteFn = (req: Request, ctx: { params: Promise<Record<string, string>> }) => Promise<Response>;

async function loadAction(entry: ActionEntry): Promise<ActionFn> {
  const mod: Record<string, unknown> = await import(join(ROOT, entry.file));
  const fn = mod[entry.exportName];
  if (typeof fn !== 'function') throw new Error(`${entry.file} does not export ${entry.exportName}`);
  return fn as ActionFn;
}

async function loadRoute(entry: RouteEntry, method: string): Promise<RouteFn> {
  const mod: Record<string, unknown> = await import(join(ROOT, entry.file));
  const fn = mod[method];
  if (typeof fn !== 'function') throw new Error(`${entry.file} does not export ${method}`);
  return fn as RouteFn;
}

const actionEntries = registryEntries().filter((e): e is [EndpointName, ActionEntry] => e[1].kind === 'action');
const routeEntries = registryEntries().filter((e): e is [EndpointName, RouteEntry] => e[1].kind === 'route');

// ───────────────────────── the registry covers the app ─────────────────────────

describe('the registry covers every endpoint of the app', () => {
  it('every exported function in app/actions is a registered action, and vice versa', async () => {
    const files = walk(join(ROOT, 'app', 'actions')).filter((p) => /\.(ts|tsx)$/.test(p));
    expect(files.length).toBeGreaterThan(0);
    const registered = new Set(actionEntries.map(([, e]) => `${e.file}#${e.exportName}`));
    const found = new Set<string>();
    for (const file of files) {
      const source = readFileSync(file, 'utf8');
      expect(source.trimStart().startsWith("'use server'"), `${rel(file)} must start with 'use server'`).toBe(true);
      const mod: Record<string, unknown> = await import(file);
      for (const name of Object.keys(mod)) {
        const key = `${rel(file)}#${name}`;
        found.add(key);
        expect(registered.has(key), `${key} is a server action missing from lib/server/authz/registry.ts`).toBe(true);
      }
    }
    for (const key of registered) expect(found.has(key), `registry entry ${key} has no such export`).toBe(true);
  });

  it('every route.ts under app/ is registered with exactly its exported methods', async () => {
    const routes = walk(join(ROOT, 'app')).filter((p) => /\/route\.(ts|tsx|js)$/.test(p));
    const byFile = new Map(routeEntries.map(([, e]) => [e.file, e]));
    for (const file of routes) {
      const entry = byFile.get(rel(file));
      expect(entry, `${rel(file)} is a route handler missing from lib/server/authz/registry.ts`).toBeDefined();
      const source = readFileSync(file, 'utf8');
      const methods = ['GET', 'POST', 'PUT', 'PATCH', 'DELETE', 'HEAD', 'OPTIONS'].filter((m) =>
        new RegExp(`export\\s+(async\\s+)?(function|const)\\s+${m}\\b|as\\s+${m}\\b`).test(source),
      );
      expect([...methods].sort(), `${rel(file)} methods`).toEqual([...(entry?.methods ?? [])].sort());
    }
    for (const [, e] of routeEntries) expect(routes.map(rel), `registered route ${e.file} exists`).toContain(e.file);
  });

  it("declares server actions only in app/actions ('use server' nowhere else)", () => {
    const dirs = ['app', 'components', 'lib'].map((d) => join(ROOT, d));
    const offenders = dirs
      .flatMap((d) => walk(d))
      .filter((p) => /\.(ts|tsx)$/.test(p) && !rel(p).startsWith('app/actions/') && !rel(p).startsWith('lib/server/generated/'))
      .filter((p) => /^\s*['"]use server['"]/m.test(readFileSync(p, 'utf8')));
    expect(offenders.map(rel)).toEqual([]);
  });

  it('has a probe in this test for every registry entry', () => {
    for (const [name, e] of registryEntries()) {
      if (e.kind === 'action') expect(ACTION_PROBES[name], `add a probe for action "${name}" to this test`).toBeDefined();
      else if (!NEXT_AUTH_ROUTES.has(name)) expect(ROUTE_PROBES[name], `add a probe for route "${name}" to this test`).toBeDefined();
    }
  });

  it('refuses to define an endpoint that is unregistered or declared with another role', () => {
    const input = z.object({});
    // A registered name with a weaker role than registered: refused at definition time.
    expect(() => defineAction({ name: 'removeMember', input, role: 'member', resource: () => ({ teamId: 'x' }) }, async () => 1)).toThrow(
      /registered with access "lead" but defined with "member"/,
    );
  });

  it('routes served by next-auth delegate to next-auth with our options', () => {
    for (const name of NEXT_AUTH_ROUTES) {
      const entry = routeEntries.find(([n]) => n === name)?.[1];
      if (!entry) throw new Error(`route ${name} is not registered`);
      expect(entry.via).toBe('next-auth');
      const source = readFileSync(join(ROOT, entry.file), 'utf8');
      expect(source).toMatch(/NextAuth\(req, context, authOptions\(\)\)/);
    }
  });
});

// ───────────────────────── hostile callers are refused, nothing changes ─────────────────────────

describe('every endpoint refuses hostile callers and leaves the database unchanged', () => {
  let app: AppDatabase;
  let f: Fixture;
  const cookies = {} as Record<Caller, string>;

  beforeAll(async () => {
    app = await openAppDatabase();
    f = await buildFixture(app.client);
    cookies.leadA = await sessionFor(f.leadA);
    cookies.reviewerA = await sessionFor(f.reviewerA);
    cookies.observerA = await sessionFor(f.observerA);
    cookies.leadB = await sessionFor(f.leadB);
  });
  afterAll(async () => {
    await app.close();
  });

  async function expectRefusedUnchanged(run: () => Promise<{ status: number }>, expected: number[]): Promise<number> {
    const before = await snapshot(app.t);
    const { status } = await run();
    const after = await snapshot(app.t);
    expect(status).not.toBe(500);
    expect(expected).toContain(status);
    expect(after).toEqual(before);
    return status;
  }

  const actionStatus = async (fn: ActionFn, cookie: string | null, input: unknown) => {
    const r = await call(contextFor(cookie), () => fn(input));
    return { status: r.ok ? 200 : r.status };
  };

  for (const [name, entry] of actionEntries) {
    describe(`action ${name} (${entry.access}${entry.writes ? ', writes' : ''})`, () => {
      const probe = () => {
        const p = ACTION_PROBES[name];
        if (!p) throw new Error(`no probe for ${name}`);
        return p;
      };

      it('(a) without a session', async () => {
        const fn = await loadAction(entry);
        const p = probe();
        if (entry.access === 'public') {
          if (!p.hostile) throw new Error(`public action ${name} needs a hostile probe`);
          await expectRefusedUnchanged(() => actionStatus(fn, null, p.hostile!.input(f)), [p.hostile.expect]);
        } else {
          await expectRefusedUnchanged(() => actionStatus(fn, null, p.input(f)), [401]);
        }
      });

      it('(b) as a member of another team', async () => {
        const fn = await loadAction(entry);
        const p = probe();
        if (entry.access === 'public' || entry.access === 'signed-in') {
          if (p.hostile) {
            await expectRefusedUnchanged(() => actionStatus(fn, cookies.leadB, p.hostile!.input(f)), [p.hostile.expect]);
          } else {
            // The endpoint cannot name another team's resources; calling it must leave team A as it was.
            expect(p.notTeamScoped, `${name}: give a hostile probe or a notTeamScoped reason`).toBeTruthy();
            const before = await snapshot(app.t);
            const r = await actionStatus(fn, cookies.leadB, p.input(f));
            expect(r.status).toBe(200);
            const after = await snapshot(app.t);
            for (const table of ['Team', 'Membership', 'Invitation', 'Project']) {
              const mentionsA = (rows: string[]) => rows.filter((row) => row.includes(f.teamA));
              expect(mentionsA(after.data[table] ?? []), table).toEqual(mentionsA(before.data[table] ?? []));
            }
          }
          return;
        }
        await expectRefusedUnchanged(() => actionStatus(fn, cookies.leadB, p.input(f)), [404]);
      });

      it('(c) as an observer of the owning team, where it writes', async () => {
        const fn = await loadAction(entry);
        const p = probe();
        if (!entry.writes) return;
        const input = p.hostile && (entry.access === 'public' || entry.access === 'signed-in') ? p.hostile.input(f) : p.input(f);
        const expected = entry.access === 'public' || entry.access === 'signed-in' ? [p.hostile?.expect ?? 403] : [403];
        if (entry.access === 'signed-in' && !p.hostile) return; // not team-scoped (see (b))
        await expectRefusedUnchanged(() => actionStatus(fn, cookies.observerA, input), expected);
      });

      it('(d) as a reviewer of the owning team, where a lead is required', async () => {
        if (entry.access !== 'lead') return;
        const fn = await loadAction(entry);
        await expectRefusedUnchanged(() => actionStatus(fn, cookies.reviewerA, probe().input(f)), [403]);
      });
    });
  }

  for (const [name, entry] of routeEntries) {
    if (NEXT_AUTH_ROUTES.has(name)) continue;
    describe(`route ${name} (${entry.access}, via ${entry.via})`, () => {
      const routeStatus = async (cookie: string | null, bearer?: string) => {
        const p = ROUTE_PROBES[name];
        if (!p) throw new Error(`no probe for route ${name}`);
        const fn = await loadRoute(entry, p.method);
        const url = new URL('http://127.0.0.1/probe');
        for (const [k, v] of Object.entries(p.query?.(f) ?? {})) url.searchParams.set(k, v);
        const headers: Record<string, string> = { 'content-type': p.rawBody === undefined ? 'application/json' : 'text/csv' };
        if (bearer !== undefined) headers.authorization = `Bearer ${bearer}`;
        const req = new Request(url, {
          method: p.method,
          headers,
          body: p.rawBody ?? (p.body ? JSON.stringify(p.body(f)) : undefined),
        });
        const res = await call(contextFor(cookie), () =>
          fn(req, { params: Promise.resolve(p.params(f) as Record<string, string>) }),
        );
        await res.text(); // let a streamed answer (import progress) finish before comparing
        return { status: res.status };
      };
      if (entry.access === 'token') {
        // Pipeline routes take a bearer token, never a session.
        it('(a) without a token, even with a session of the owning team', async () => {
          await expectRefusedUnchanged(() => routeStatus(null), [401]);
          await expectRefusedUnchanged(() => routeStatus(cookies.leadA), [401]);
        });
        it("(b) with another team's project token", async () => {
          await expectRefusedUnchanged(() => routeStatus(null, f.tokenB.secret), [404]);
        });
        it('(c) with a revoked or made-up token', async () => {
          await expectRefusedUnchanged(() => routeStatus(null, f.revokedTokenA.secret), [401]);
          await expectRefusedUnchanged(() => routeStatus(null, `blp_${'x'.repeat(43)}`), [401]);
        });
        return;
      }
      const expected = (who: 'none' | 'other' | 'observer'): number[] => {
        if (entry.access === 'public') return [200]; // public routes answer anyone; they must not write
        if (who === 'none') return [401];
        if (who === 'other') return [404];
        return [403];
      };
      it('(a) without a session', async () => {
        await expectRefusedUnchanged(() => routeStatus(null), expected('none'));
      });
      it('(b) as a member of another team', async () => {
        await expectRefusedUnchanged(() => routeStatus(cookies.leadB), expected('other'));
      });
      it('(c) as an observer, where it writes', async () => {
        if (!entry.writes) return;
        await expectRefusedUnchanged(() => routeStatus(cookies.observerA), expected('observer'));
      });
    });
  }

  // Each probe is a real request: the allowed caller gets through (on a fresh fixture, since
  // these succeed and change things).
  for (const [name, entry] of actionEntries) {
    it(`probe for ${name} is accepted from its allowed caller`, async () => {
      const p = ACTION_PROBES[name];
      if (!p || p.allowed === 'none') return;
      const g = await buildFixture(app.client, new Date(), `-${name.toLowerCase()}`);
      const who = { leadA: g.leadA, reviewerA: g.reviewerA, observerA: g.observerA, leadB: g.leadB }[p.allowed];
      const fn = await loadAction(entry);
      const r = await call(contextFor(await sessionFor(who)), () => fn(p.input(g)));
      expect(r, JSON.stringify(r)).toMatchObject({ ok: true });
    });
  }
});
