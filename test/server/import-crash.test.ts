// The crash case: a child process imports a large file and is killed with SIGKILL while it is
// writing to the database (after several batches went in). Afterwards nothing of the partial
// import remains — every row of every table is as before — and the project imports again.

import { spawn } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { snapshot } from './db-harness';
import { newProject, openImportWorld, runImport, type ImportWorld } from './import-helpers';

const ROOT = fileURLToPath(new URL('../..', import.meta.url));
const CHILD = fileURLToPath(new URL('./import-crash-child.ts', import.meta.url));
const ROWS = 60_000;
const FEATURES = 16;
const KILL_AFTER_WRITTEN = 2_000;

let w: ImportWorld;
let dir: string;
let file: string;

beforeAll(async () => {
  w = await openImportWorld();
  dir = mkdtempSync(join(tmpdir(), 'borderline-crash-'));
  file = join(dir, 'big.csv');
  const lines = [`id,label,${Array.from({ length: FEATURES }, (_, j) => `f${j}`).join(',')}`];
  for (let i = 0; i < ROWS; i++) {
    const values = Array.from({ length: FEATURES }, (_, j) => ((i * 31 + j * 7) % 1000) / 100 - 5);
    lines.push(`k${i},${['north', 'south', 'east'][i % 3]},${values.join(',')}`);
  }
  writeFileSync(file, `${lines.join('\n')}\n`);
});
afterAll(async () => {
  await w.close();
  rmSync(dir, { recursive: true, force: true });
});

/** Runs the child and SIGKILLs it once it has written KILL_AFTER_WRITTEN rows. */
function importAndKill(projectId: string): Promise<{ killedAt: number | null; finished: boolean; stderr: string }> {
  return new Promise((resolve, reject) => {
    const child = spawn(process.execPath, ['--import', 'tsx', CHILD, w.t.url, w.teamId, projectId, w.userId, file], {
      cwd: ROOT,
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    let killedAt: number | null = null;
    let finished = false;
    let stderr = '';
    let buffered = '';
    child.stdout.setEncoding('utf8');
    child.stdout.on('data', (text: string) => {
      buffered += text;
      let nl = buffered.indexOf('\n');
      while (nl !== -1) {
        const line = buffered.slice(0, nl);
        buffered = buffered.slice(nl + 1);
        const m = /^progress writing \d+ (\d+)$/.exec(line);
        if (m && killedAt === null && Number(m[1]) >= KILL_AFTER_WRITTEN) {
          killedAt = Number(m[1]);
          child.kill('SIGKILL');
        }
        if (line.startsWith('finished')) finished = true;
        nl = buffered.indexOf('\n');
      }
    });
    child.stderr.setEncoding('utf8');
    child.stderr.on('data', (text: string) => {
      stderr += text;
    });
    child.on('error', reject);
    child.on('exit', () => resolve({ killedAt, finished, stderr }));
  });
}

describe('an import killed mid-write leaves nothing behind', () => {
  it('SIGKILL during the write: database unchanged, then the same file imports', async () => {
    const projectId = await newProject(w, { featureCount: FEATURES });
    const seeded = await runImport(w, projectId, `id,label,${Array.from({ length: FEATURES }, (_, j) => `f${j}`).join(',')}\nold1,north,${Array(FEATURES).fill(1).join(',')}\n`);
    if (!seeded.ok) throw new Error('seed import failed');
    const before = await snapshot(w.t);

    const run = await importAndKill(projectId);
    expect(run.finished, `the child finished before it was killed (stderr: ${run.stderr})`).toBe(false);
    expect(run.killedAt).toBeGreaterThanOrEqual(KILL_AFTER_WRITTEN);

    const after = await snapshot(w.t);
    expect(after.data).toEqual(before.data);
    expect(after.schema).toEqual(before.schema);
    if (w.t.provider === 'sqlite') {
      const rows = await w.db.$queryRawUnsafe<{ integrity_check: string }[]>('PRAGMA integrity_check');
      expect(rows).toEqual([{ integrity_check: 'ok' }]);
    }

    const again = await runImport(w, projectId, new Uint8Array(readFileSync(file)), { fileName: 'big.csv' });
    if (!again.ok) throw new Error(JSON.stringify(again.problems));
    expect(again).toMatchObject({ added: ROWS, revisionNumber: 1 });
    expect(await w.db.sample.count({ where: { projectId } })).toBe(ROWS + 1);
  });
});
