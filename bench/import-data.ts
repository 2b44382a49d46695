/**
 * The import benchmarks' CSV (bench/import.ts, bench/import-job.ts): deterministic (pure-rand
 * xoroshiro128+), 4 classes, features uniform in [-1, 1) shifted by 0.5 on the class's columns.
 */
import { createWriteStream, statSync } from 'node:fs';
import { unsafeUniformIntDistribution, xoroshiro128plus } from 'pure-rand';
import { formatFloat32 } from '../lib/server/import/numbers';

export const CLASSES = ['alpha', 'beta', 'gamma', 'delta'];

/** Writes the benchmark CSV; returns its size in bytes. */
export async function generateCsv(path: string, rows: number, cols: number, seed = 20240611): Promise<number> {
  const rng = xoroshiro128plus(seed);
  const out = createWriteStream(path);
  const header = ['id', 'label'];
  for (let j = 0; j < cols; j++) header.push(`f${j}`);
  let buf = `${header.join(',')}\n`;
  const cells = new Array<string>(cols + 2);
  for (let i = 0; i < rows; i++) {
    cells[0] = `s${String(i).padStart(6, '0')}`;
    const k = unsafeUniformIntDistribution(0, CLASSES.length - 1, rng);
    cells[1] = CLASSES[k];
    for (let j = 0; j < cols; j++) {
      // Uniform in [-1, 1) with 2^24 steps, shifted by the class so the classes differ.
      const u = unsafeUniformIntDistribution(0, (1 << 24) - 1, rng) / (1 << 23) - 1;
      cells[j + 2] = formatFloat32(Math.fround(u + (j % CLASSES.length === k ? 0.5 : 0)));
    }
    buf += `${cells.join(',')}\n`;
    if (buf.length > 1 << 20) {
      if (!out.write(buf)) await new Promise<void>((r) => out.once('drain', () => r()));
      buf = '';
    }
  }
  await new Promise<void>((resolve, reject) => {
    out.end(buf, () => resolve());
    out.on('error', reject);
  });
  return statSync(path).size;
}
