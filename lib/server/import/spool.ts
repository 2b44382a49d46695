/**
 * The spool: validated rows on disk between reading the file and writing the database.
 *
 * Reading and validating the whole file first (so nothing is written when any row is wrong)
 * must not hold the file in memory; each valid row is appended here in a compact binary form
 * and read back in batches inside the database transaction. The spool lives in a private
 * temporary folder and is removed when the import ends (a crash leaves only that folder, which
 * the operating system's temp cleaner reclaims; the database is untouched by a crash).
 *
 * Record layout: u32 LE header length, u32 LE feature byte length, header (UTF-8 JSON array
 * [row, id, label, text, image, metadata]), feature bytes (float32 LE).
 */
import { createReadStream } from 'node:fs';
import { mkdtemp, open, rm, type FileHandle } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

export interface StagedRow {
  row: number;
  id: string;
  label: string;
  text: string | null;
  image: string | null;
  /** JSON object text, or null when the row has no metadata. */
  metadata: string | null;
  /** float32 LE bytes, featureCount × 4. */
  features: Uint8Array<ArrayBuffer>;
}

type Header = [number, string, string, string | null, string | null, string | null];

const FLUSH_BYTES = 4 * 1024 * 1024;

export class SpoolWriter {
  readonly dir: string;
  readonly path: string;
  private handle: FileHandle | null = null;
  private parts: Buffer[] = [];
  private size = 0;
  count = 0;

  private constructor(dir: string) {
    this.dir = dir;
    this.path = join(dir, 'rows.spool');
  }

  static async create(): Promise<SpoolWriter> {
    const dir = await mkdtemp(join(tmpdir(), 'borderline-import-'));
    const w = new SpoolWriter(dir);
    w.handle = await open(w.path, 'w', 0o600);
    return w;
  }

  async add(row: StagedRow): Promise<void> {
    const header: Header = [row.row, row.id, row.label, row.text, row.image, row.metadata];
    const head = Buffer.from(JSON.stringify(header), 'utf8');
    const rec = Buffer.allocUnsafe(8 + head.length + row.features.byteLength);
    rec.writeUInt32LE(head.length, 0);
    rec.writeUInt32LE(row.features.byteLength, 4);
    head.copy(rec, 8);
    rec.set(row.features, 8 + head.length);
    this.parts.push(rec);
    this.size += rec.length;
    this.count++;
    if (this.size >= FLUSH_BYTES) await this.flush();
  }

  private async flush(): Promise<void> {
    if (this.size === 0 || this.handle === null) return;
    const buf = Buffer.concat(this.parts, this.size);
    this.parts = [];
    this.size = 0;
    await this.handle.write(buf, 0, buf.length);
  }

  /** Finishes writing; the spool can then be read with `readSpool`. */
  async close(): Promise<void> {
    await this.flush();
    if (this.handle !== null) {
      await this.handle.close();
      this.handle = null;
    }
  }

  /** Removes the spool folder (always call, also after failures). */
  async dispose(): Promise<void> {
    if (this.handle !== null) {
      await this.handle.close().catch(() => undefined);
      this.handle = null;
    }
    await rm(this.dir, { recursive: true, force: true });
  }
}

/** Reads the spool back in batches of `batchSize` rows, in the order they were written. */
export async function* readSpool(path: string, batchSize: number): AsyncGenerator<StagedRow[]> {
  let leftover: Buffer = Buffer.alloc(0);
  let batch: StagedRow[] = [];
  for await (const chunk of createReadStream(path, { highWaterMark: FLUSH_BYTES })) {
    let buf: Buffer = leftover.length > 0 ? Buffer.concat([leftover, chunk as Buffer]) : (chunk as Buffer);
    let pos = 0;
    while (buf.length - pos >= 8) {
      const headLen = buf.readUInt32LE(pos);
      const featLen = buf.readUInt32LE(pos + 4);
      const end = pos + 8 + headLen + featLen;
      if (end > buf.length) break;
      const h = JSON.parse(buf.toString('utf8', pos + 8, pos + 8 + headLen)) as Header;
      const features = new Uint8Array(featLen);
      features.set(buf.subarray(pos + 8 + headLen, end));
      batch.push({ row: h[0], id: h[1], label: h[2], text: h[3], image: h[4], metadata: h[5], features });
      pos = end;
      if (batch.length >= batchSize) {
        yield batch;
        batch = [];
      }
    }
    leftover = buf.subarray(pos);
    buf = Buffer.alloc(0);
  }
  if (leftover.length > 0) throw new Error('spool: truncated record');
  if (batch.length > 0) yield batch;
}
