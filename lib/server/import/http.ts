/**
 * HTTP glue of the import: request bodies as byte streams, and the two ways of answering.
 *
 * - The Data screen's upload (`importProgressResponse`) answers at once with a stream of JSON
 *   lines while the file is still arriving: `{"type":"progress",…}` lines during reading and
 *   writing, then one `{"type":"result","outcome":…}` (or `{"type":"error",…}` for a fault).
 * - The pipeline API (`importJsonResponse`) answers once, with a status a script can test:
 *   200 imported, 400 refused (problems listed), 409 concurrent change.
 */
import { DATA_LIMITS } from '../../domain-data';
import { badRequest, tooLarge } from '../authz/errors';
import type { TeamScope } from '../authz/scope';
import { importSamples, type ImportInput, type ImportOutcome } from './index';

/** The request body as bytes, refusing more than `limit` bytes. */
export async function* requestBytes(req: Request, limit: number = DATA_LIMITS.importBytes): AsyncGenerator<Uint8Array> {
  if (req.body === null) throw badRequest('The request has no file in its body.');
  const declared = Number(req.headers.get('content-length') ?? '0');
  if (declared > limit) throw tooLarge(`The file is larger than ${formatBytes(limit)}.`);
  const reader = req.body.getReader();
  let total = 0;
  try {
    for (;;) {
      const { done, value } = await reader.read();
      if (done) return;
      total += value.byteLength;
      if (total > limit) throw tooLarge(`The file is larger than ${formatBytes(limit)}.`);
      yield value;
    }
  } finally {
    reader.releaseLock();
  }
}

export function formatBytes(n: number): string {
  if (n >= 1024 ** 3) return `${(n / 1024 ** 3).toFixed(n % 1024 ** 3 === 0 ? 0 : 1)} GB`;
  if (n >= 1024 ** 2) return `${(n / 1024 ** 2).toFixed(n % 1024 ** 2 === 0 ? 0 : 1)} MB`;
  return `${n} bytes`;
}

export type ImportStreamLine =
  | { type: 'progress'; phase: 'reading' | 'writing' | 'done'; bytes: number; rows: number; written: number }
  | { type: 'result'; outcome: ImportOutcome }
  | { type: 'error'; status: number; error: string };

const FAULT = 'Something went wrong on our side and nothing was imported. Try again in a moment.';

/** Runs the import and answers with JSON lines of progress, then the outcome. */
export function importProgressResponse(scope: TeamScope, projectId: string, input: Omit<ImportInput, 'source'>, req: Request): Response {
  const encoder = new TextEncoder();
  const stream = new ReadableStream<Uint8Array>({
    start(controller) {
      let open = true;
      const send = (line: ImportStreamLine) => {
        if (!open) return;
        try {
          controller.enqueue(encoder.encode(`${JSON.stringify(line)}\n`));
        } catch {
          open = false; // the browser went away; the import itself carries on or fails whole
        }
      };
      void (async () => {
        try {
          const outcome = await importSamples(scope, projectId, { ...input, source: requestBytes(req) }, {
            onProgress: (p) => send({ type: 'progress', ...p }),
            progressEveryMs: 250,
          });
          send({ type: 'result', outcome });
        } catch (error) {
          const status = errorStatus(error);
          if (status === 500) console.error('[import] failed', error);
          send({ type: 'error', status, error: status === 500 ? FAULT : error instanceof Error ? error.message : FAULT });
        } finally {
          if (open) {
            open = false;
            try {
              controller.close();
            } catch {
              // already closed by a cancelled response
            }
          }
        }
      })();
    },
  });
  return new Response(stream, {
    status: 200,
    headers: {
      'content-type': 'application/x-ndjson; charset=utf-8',
      'cache-control': 'no-store',
      'x-accel-buffering': 'no',
      'x-content-type-options': 'nosniff',
    },
  });
}

function errorStatus(error: unknown): number {
  if (error && typeof error === 'object' && 'status' in error) {
    const s = (error as { status: unknown }).status;
    if (typeof s === 'number' && s >= 400 && s < 500) return s;
  }
  return 500;
}

/** Runs the import and answers once with JSON (pipeline API). */
export async function importJsonResponse(scope: TeamScope, projectId: string, input: Omit<ImportInput, 'source'>, req: Request): Promise<Response> {
  const outcome = await importSamples(scope, projectId, { ...input, source: requestBytes(req) });
  const headers = { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store' };
  if (outcome.ok) {
    const { ok, format, rows, added, relabelled, updated, unchanged, revisionNumber, fitId, newClasses, batchId, mode } = outcome;
    return new Response(
      JSON.stringify({ ok, batchId, format, mode, rows, added, relabelled, updated, unchanged, newClasses, revision: revisionNumber, fitId }),
      { status: 200, headers },
    );
  }
  return new Response(
    JSON.stringify({ ok: false, error: outcome.problems[0]?.message ?? 'The file was refused.', problems: outcome.problems, truncated: outcome.truncated }),
    { status: outcome.status, headers },
  );
}
