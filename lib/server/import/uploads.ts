/**
 * Images uploaded with an import.
 *
 * The browser sends each image file before the data file, tagged with an upload batch id it
 * chose (random). A file is stored under <data dir>/uploads/<projectId>/<batch>/ with a
 * generated name — 32 hex characters of SHA-256 of the original file name, and an extension
 * from the file's own signature (PNG, JPEG, GIF, WebP; anything else is refused) — so nothing
 * the uploader wrote reaches the file system as a path. The import then maps an `image` value
 * that is not a URL to the stored file of that name: Sample.imageRef = `upload:<batch>/<file>`.
 * A refused import removes its batch folder.
 */
import { createHash, randomBytes } from 'node:crypto';
import { createReadStream, readdirSync, statSync } from 'node:fs';
import { mkdir, open, rename, rm, stat } from 'node:fs/promises';
import { join } from 'node:path';
import type { Readable } from 'node:stream';
import { UPLOAD_REF_PREFIX } from '../../data-columns';
import { DATA_LIMITS } from '../../domain-data';
import { badRequest, tooLarge } from '../authz/errors';
import { env } from '../env';

const BATCH_RE = /^[A-Za-z0-9_-]{16,64}$/;
const FILE_RE = /^[0-9a-f]{32}\.(png|jpg|gif|webp)$/;
const ID_RE = /^[A-Za-z0-9_-]{1,64}$/;

export const IMAGE_TYPES = { png: 'image/png', jpg: 'image/jpeg', gif: 'image/gif', webp: 'image/webp' } as const;
export type ImageExt = keyof typeof IMAGE_TYPES;

function uploadsRoot(): string {
  return join(env().dataDir, 'uploads');
}

function batchDir(projectId: string, batch: string): string {
  if (!ID_RE.test(projectId) || !BATCH_RE.test(batch)) throw badRequest('The upload batch id is not valid.');
  return join(uploadsRoot(), projectId, batch);
}

/** The image type from the file's first bytes, or null. */
export function sniffImage(head: Uint8Array): ImageExt | null {
  const at = (i: number, ...sig: number[]) => sig.every((v, k) => head[i + k] === v);
  if (head.length >= 8 && at(0, 0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a)) return 'png';
  if (head.length >= 3 && at(0, 0xff, 0xd8, 0xff)) return 'jpg';
  if (head.length >= 6 && (at(0, 0x47, 0x49, 0x46, 0x38, 0x37, 0x61) || at(0, 0x47, 0x49, 0x46, 0x38, 0x39, 0x61))) return 'gif';
  if (head.length >= 12 && at(0, 0x52, 0x49, 0x46, 0x46) && at(8, 0x57, 0x45, 0x42, 0x50)) return 'webp';
  return null;
}

/** The generated file stem for an original file name (what the import looks up). */
export function storedStem(originalName: string): string {
  return createHash('sha256').update(originalName.trim(), 'utf8').digest('hex').slice(0, 32);
}

/**
 * Stores one uploaded image. Refuses non-images (by signature) and files over the size cap.
 * Returns the stored reference.
 */
export async function saveUploadedImage(
  projectId: string,
  batch: string,
  originalName: string,
  source: AsyncIterable<Uint8Array>,
): Promise<{ name: string; ref: string; bytes: number }> {
  const dir = batchDir(projectId, batch);
  await mkdir(dir, { recursive: true });
  const temp = join(dir, `.part-${randomBytes(8).toString('hex')}`);
  const fh = await open(temp, 'wx', 0o600);
  let bytes = 0;
  let ext: ImageExt | null = null;
  let head = new Uint8Array(0);
  try {
    for await (const chunk of source) {
      bytes += chunk.byteLength;
      if (bytes > DATA_LIMITS.imageBytes) throw tooLarge(`The image is larger than ${DATA_LIMITS.imageBytes / (1024 * 1024)} MB.`);
      if (ext === null && head.length < 12) {
        const joined = new Uint8Array(head.length + chunk.byteLength);
        joined.set(head, 0);
        joined.set(chunk, head.length);
        head = joined.subarray(0, Math.min(joined.length, 16));
        if (head.length >= 12) {
          ext = sniffImage(head);
          if (ext === null) throw badRequest('The file is not a PNG, JPEG, GIF or WebP image.');
        }
      }
      await fh.write(chunk);
    }
    if (ext === null) ext = sniffImage(head);
    if (ext === null) throw badRequest('The file is not a PNG, JPEG, GIF or WebP image.');
    await fh.close();
    const file = `${storedStem(originalName)}.${ext}`;
    await rename(temp, join(dir, file));
    return { name: originalName.trim(), ref: `${UPLOAD_REF_PREFIX}${batch}/${file}`, bytes };
  } catch (error) {
    await fh.close().catch(() => undefined);
    await rm(temp, { force: true });
    throw error;
  }
}

/**
 * A resolver from `image` values that are not URLs to stored references: a file name uploaded
 * with this import's batch, or an existing `upload:<batch>/<file>` reference of this project (as
 * an export writes it), when that file is still stored.
 */
export function imageResolver(projectId: string, batch: string | undefined): (name: string) => string | null {
  let byStem = new Map<string, string>();
  if (batch !== undefined) {
    let files: string[];
    try {
      files = readdirSync(batchDir(projectId, batch)).filter((f) => FILE_RE.test(f));
    } catch {
      files = [];
    }
    byStem = new Map(files.map((f) => [f.slice(0, 32), f]));
  }
  return (name: string) => {
    if (name.startsWith(UPLOAD_REF_PREFIX)) {
      const [refBatch, file, extra] = name.slice(UPLOAD_REF_PREFIX.length).split('/');
      if (extra !== undefined || refBatch === undefined || file === undefined) return null;
      if (!BATCH_RE.test(refBatch) || !FILE_RE.test(file)) return null;
      try {
        return statSync(join(batchDir(projectId, refBatch), file)).isFile() ? name : null;
      } catch {
        return null;
      }
    }
    if (batch === undefined) return null;
    const file = byStem.get(storedStem(name));
    return file === undefined ? null : `${UPLOAD_REF_PREFIX}${batch}/${file}`;
  };
}

/** Removes an upload batch (after a refused import). */
export async function discardUploadBatch(projectId: string, batch: string | undefined): Promise<void> {
  if (batch === undefined) return;
  await rm(batchDir(projectId, batch), { recursive: true, force: true });
}

/** Opens a stored image for serving, or null when there is no such file. */
export async function openStoredImage(
  projectId: string,
  batch: string,
  file: string,
): Promise<{ stream: Readable; contentType: string; size: number } | null> {
  if (!FILE_RE.test(file)) return null;
  const path = join(batchDir(projectId, batch), file);
  try {
    const s = await stat(path);
    if (!s.isFile()) return null;
    const ext = file.slice(file.lastIndexOf('.') + 1) as ImageExt;
    return { stream: createReadStream(path), contentType: IMAGE_TYPES[ext], size: s.size };
  } catch {
    return null;
  }
}
