/**
 * Worker-thread entry of the import thread (started by thread.ts; not imported by anything else).
 * Runs `importSamples` (or, for the PostgreSQL job system, `stageImport`) on its own database
 * client per database, fed by the bytes the server thread relays; on SQLite its writes take their turn as a background writer (workerData.gate, the
 * server thread's writer gate). Protocol: see thread.ts.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { mintTeamScope } from '../authz/scope';
import { createDb, type Db } from '../db';
import type { DatabaseConfig } from '../env';
import { writeAsBackgroundThread } from '../queue/tx';
import { importSamples } from './index';
import { stageImport } from './staged';
import { fromThreadError, toThreadError, type FromThread, type ToThread } from './thread';

const port = parentPort;
if (!port) throw new Error('lib/server/import/thread-worker.ts must run in a worker thread');
const gate = (workerData as { gate?: unknown } | null)?.gate;
if (gate instanceof Int32Array) writeAsBackgroundThread(gate);

const send = (m: FromThread) => port.postMessage(m);

/** One client (connection) per database, for the life of the thread. */
const clients = new Map<string, Db>();
function clientFor(config: DatabaseConfig): Db {
  const key = config.provider === 'sqlite' ? `sqlite:${config.file}` : `postgresql:${config.url}`;
  let client = clients.get(key);
  if (!client) {
    client = createDb(config);
    clients.set(key, client);
  }
  return client;
}

/** The bytes of one import as they arrive, with their read reported back (back-pressure). */
class Inbox implements AsyncIterable<Uint8Array> {
  private readonly chunks: Uint8Array[] = [];
  private ended = false;
  private failure: Error | null = null;
  private wake: (() => void) | null = null;
  constructor(private readonly id: number) {}

  push(bytes: Uint8Array): void {
    this.chunks.push(bytes);
    this.notify();
  }
  end(): void {
    this.ended = true;
    this.notify();
  }
  fail(error: Error): void {
    this.failure = error;
    this.notify();
  }
  private notify(): void {
    const w = this.wake;
    this.wake = null;
    w?.();
  }

  async *[Symbol.asyncIterator](): AsyncGenerator<Uint8Array> {
    for (;;) {
      const chunk = this.chunks.shift();
      if (chunk) {
        send({ type: 'read', id: this.id, bytes: chunk.byteLength });
        yield chunk;
        continue;
      }
      if (this.failure) throw this.failure;
      if (this.ended) return;
      await new Promise<void>((r) => (this.wake = r));
    }
  }
}

const inboxes = new Map<number, Inbox>();

port.on('message', (m: ToThread) => {
  if (m.type === 'start') {
    const inbox = new Inbox(m.id);
    inboxes.set(m.id, inbox);
    void importSamples(mintTeamScope(m.teamId), m.projectId, { ...m.input, source: inbox }, {
      client: clientFor(m.database),
      onProgress: (progress) => send({ type: 'progress', id: m.id, progress }),
      progressEveryMs: 250,
    })
      .then((outcome) => send({ type: 'outcome', id: m.id, outcome }))
      .catch((error: unknown) => send({ type: 'error', id: m.id, error: toThreadError(error) }))
      .finally(() => inboxes.delete(m.id));
    return;
  }
  if (m.type === 'stage') {
    const inbox = new Inbox(m.id);
    inboxes.set(m.id, inbox);
    void stageImport(clientFor(m.database), mintTeamScope(m.teamId), m.projectId, m.settings, m.userId, inbox, {
      onStored: (bytes) => send({ type: 'stored', id: m.id, bytes }),
    })
      .then((staged) => send({ type: 'staged', id: m.id, staged }))
      .catch((error: unknown) => send({ type: 'error', id: m.id, error: toThreadError(error) }))
      .finally(() => inboxes.delete(m.id));
    return;
  }
  const inbox = inboxes.get(m.id);
  if (!inbox) return; // finished already (e.g. refused before the end of the file)
  if (m.type === 'chunk') inbox.push(m.bytes);
  else if (m.type === 'end') inbox.end();
  else inbox.fail(fromThreadError(m.error));
});
