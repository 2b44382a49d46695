/**
 * The in-process FitJobQueue: the default on the embedded database (and a single app instance).
 *
 * - A poll loop (every `pollMs`, default 2 s) looks for projects with queued fits; `enqueue` wakes it
 *   at once. Queued fits are Fit rows, so requests made by other code paths or before a restart are
 *   picked up too.
 * - At most `concurrency` projects fit at a time (default 1: the machine's other core keeps serving
 *   requests); each project runs `processProject` until it has nothing queued. Within a project
 *   fits run one after another — and `processProject` refuses to start while the database shows a
 *   running fit of that project.
 * - The engine runs in a worker thread (workerEngine), so the server's event loop never solves.
 * - A newer revision for a project whose follow-up full pass is running cancels that pass (the
 *   quick pass of the new revision then runs without waiting); primary fits are never cancelled.
 * - With `bootstrap`, start also queues a first fit for projects that have none (a seed script
 *   that wrote samples directly).
 * - On start, fits left `running` by a previous process are put back to `queued` (this queue
 *   assumes it is the only worker of its database; several workers need the job system, job-system.ts).
 */
import type { Db } from '../db';
import type { Clock } from '../queue/context';
import { queueFirstFits } from './enqueue';
import type { EngineRunner } from './engine';
import type { StandingsWriter } from './standings-writer';
import type { FitJobQueue, FitRequest } from './jobs';
import { processProject, type ProcessOutcome } from './run-fit';

export interface InProcessOptions {
  readonly engine: EngineRunner;
  readonly pollMs?: number;
  readonly concurrency?: number;
  readonly clock?: Clock;
  readonly log?: (line: string) => void;
  /** called after every fit this queue ran (tests, benchmarks) */
  readonly onOutcome?: (projectId: string, outcome: ProcessOutcome) => void;
  /** queue a full pass after each quick pass (default true) */
  readonly followUp?: boolean;
  /** called when a fit became current (its queue rebuilt), before its standings are stored */
  readonly onComplete?: (projectId: string, fit: { id: string; revisionNumber: number; pass: 'full' | 'quick' }) => void;
  /** where standings go (default: batched inserts through the queue's client) */
  readonly standingsWriter?: StandingsWriter;
  /** on start, queue a fit for every project that has none yet (default false) */
  readonly bootstrap?: boolean;
}

interface Active {
  controller: AbortController;
  current: { id: string; revisionNumber: number; followUp: boolean } | null;
  readonly done: Promise<void>;
}

export class InProcessFitQueue implements FitJobQueue {
  readonly #db: Db;
  readonly #options: InProcessOptions;
  readonly #active = new Map<string, Active>();
  readonly #waiting: string[] = [];
  #timer: NodeJS.Timeout | null = null;
  #started = false;
  #stopping = false;
  #scanning: Promise<void> | null = null;

  constructor(db: Db, options: InProcessOptions) {
    this.#db = db;
    this.#options = options;
  }

  async start(): Promise<void> {
    if (this.#started) return;
    this.#started = true;
    this.#stopping = false;
    await this.#db.fit.updateMany({ where: { status: 'running' }, data: { status: 'queued', progress: 0, startedAt: null } });
    if (this.#options.bootstrap) await this.#bootstrap();
    this.#timer = setInterval(() => void this.#scan(), this.#options.pollMs ?? 2000);
    this.#timer.unref?.();
    await this.#scan();
  }

  async enqueue(request: FitRequest): Promise<void> {
    const active = this.#active.get(request.projectId);
    if (active?.current?.followUp && active.current.revisionNumber <= request.revisionNumber) active.controller.abort();
    if (!this.#started || this.#stopping) return;
    this.#schedule(request.projectId);
  }

  async stop(): Promise<void> {
    this.#stopping = true;
    if (this.#timer) clearInterval(this.#timer);
    this.#timer = null;
    this.#waiting.length = 0;
    for (const a of this.#active.values()) a.controller.abort();
    await Promise.allSettled([...this.#active.values()].map((a) => a.done));
    if (this.#scanning) await this.#scanning;
    this.#started = false;
  }

  async idle(projectId?: string): Promise<void> {
    for (;;) {
      const busyHere = projectId ? this.#active.has(projectId) || this.#waiting.includes(projectId) : this.#active.size > 0 || this.#waiting.length > 0;
      const pending = await this.#db.fit.count({ where: { status: { in: ['queued', 'running'] }, ...(projectId ? { projectId } : {}) } });
      if (!busyHere && pending === 0) return;
      if (!busyHere && pending > 0 && this.#started && !this.#stopping) await this.#scan();
      await new Promise((r) => setTimeout(r, 25));
    }
  }

  /** True while a fit of the project runs in this process. */
  isRunning(projectId: string): boolean {
    return this.#active.has(projectId);
  }

  /** Projects that never had a fit (e.g. written by a seed script) get one of their current revision. */
  async #bootstrap(): Promise<void> {
    await queueFirstFits(this.#db, (line) => this.#options.log?.(line));
  }

  async #scan(): Promise<void> {
    if (this.#stopping) return;
    if (this.#scanning) return this.#scanning;
    this.#scanning = (async () => {
      try {
        const rows = await this.#db.fit.findMany({ where: { status: 'queued' }, select: { projectId: true }, distinct: ['projectId'] });
        for (const r of rows) this.#schedule(r.projectId);
      } catch (e) {
        this.#options.log?.(`fit queue scan failed: ${e instanceof Error ? e.message : String(e)}`);
      } finally {
        this.#scanning = null;
      }
    })();
    return this.#scanning;
  }

  #schedule(projectId: string): void {
    if (this.#stopping) return;
    if (this.#active.has(projectId)) {
      if (!this.#waiting.includes(projectId)) this.#waiting.push(projectId);
      return;
    }
    if (this.#active.size >= (this.#options.concurrency ?? 1)) {
      if (!this.#waiting.includes(projectId)) this.#waiting.push(projectId);
      return;
    }
    const controller = new AbortController();
    const entry: Active = {
      controller,
      current: null,
      done: this.#runProject(projectId, controller).finally(() => {
        this.#active.delete(projectId);
        const next = this.#waiting.findIndex((p) => !this.#active.has(p));
        if (next >= 0) {
          const [p] = this.#waiting.splice(next, 1);
          this.#schedule(p);
        }
      }),
    };
    this.#active.set(projectId, entry);
  }

  async #runProject(projectId: string, controller: AbortController): Promise<void> {
    await Promise.resolve(); // let #schedule register the entry first
    let signal = controller.signal;
    let ctrl = controller;
    for (;;) {
      if (this.#stopping) return;
      const entry = this.#active.get(projectId);
      let outcome: ProcessOutcome | null;
      try {
        outcome = await processProject(this.#db, projectId, {
          engine: this.#options.engine,
          clock: this.#options.clock,
          signal,
          followUp: this.#options.followUp,
          log: this.#options.log,
          onComplete: (fit) => this.#options.onComplete?.(projectId, fit),
          standingsWriter: this.#options.standingsWriter,
          onClaim: (fit) => {
            if (entry) entry.current = fit;
          },
        });
      } catch (e) {
        this.#options.log?.(`refit of project ${projectId} stopped: ${e instanceof Error ? e.message : String(e)}`);
        return;
      }
      if (entry) entry.current = null;
      if (!outcome) return;
      this.#options.onOutcome?.(projectId, outcome);
      if (ctrl.signal.aborted) {
        if (this.#stopping) return;
        // A cancelled follow-up: carry on with the newer request using a fresh controller.
        ctrl = new AbortController();
        signal = ctrl.signal;
        if (entry) entry.controller = ctrl;
      }
    }
  }
}
