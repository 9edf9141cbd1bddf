/**
 * Gzip of closed log files, crash-safe: at every instant at least one complete copy of the
 * rows is on disk. Order of steps: stream to `<file>.gz.tmp`, fsync it, rename it to
 * `<file>.gz`, fsync the folder, and only then remove the plain file. A crash between the
 * rename and the removal leaves both; the plain one is the original and readers prefer it.
 */
import { createReadStream, createWriteStream } from 'node:fs';
import { open, readdir, rename, rm, stat } from 'node:fs/promises';
import { dirname, join } from 'node:path';
import { pipeline } from 'node:stream/promises';
import { createGzip } from 'node:zlib';

export const GZ_EXT = '.gz';
export const GZ_TMP_EXT = '.gz.tmp';

export interface CompressOutcome {
  /** The plain file that was (or was to be) compressed. */
  file: string;
  /** The compressed file, when it was made. */
  gz: string | null;
  bytesIn: number;
  bytesOut: number;
  /** Why compression failed; the plain file is then kept untouched. */
  error: Error | null;
}

/** Makes a directory entry (a rename) durable; platforms that cannot open a folder skip it. */
async function syncDir(dir: string): Promise<void> {
  let fh;
  try {
    fh = await open(dir, 'r');
  } catch (e) {
    if (['EISDIR', 'EPERM', 'EACCES'].includes((e as NodeJS.ErrnoException).code ?? '')) return;
    throw e;
  }
  try {
    await fh.sync();
  } catch (e) {
    if (!['EINVAL', 'EPERM', 'EBADF'].includes((e as NodeJS.ErrnoException).code ?? '')) throw e;
  } finally {
    await fh.close();
  }
}

/** Compresses one closed file next to itself and removes the plain one. Never throws. */
export async function compressClosedFile(file: string): Promise<CompressOutcome> {
  const gz = file + GZ_EXT;
  const tmp = file + GZ_TMP_EXT;
  let bytesIn = 0;
  try {
    bytesIn = (await stat(file)).size;
    // pipeline() carries backpressure from the disk back to the reader, so memory stays bounded;
    // `flush` fsyncs the copy before its descriptor is closed.
    await pipeline(createReadStream(file), createGzip(), createWriteStream(tmp, { flush: true }));
    const bytesOut = (await stat(tmp)).size;
    await rename(tmp, gz);
    await syncDir(dirname(file));
    await rm(file);
    return { file, gz, bytesIn, bytesOut, error: null };
  } catch (e) {
    await rm(tmp, { force: true }).catch(() => undefined);
    return { file, gz: null, bytesIn, bytesOut: 0, error: e as Error };
  }
}

/** A rotated file of a log, by number. */
interface Rotated {
  index: number;
  plain: string | null;
  gz: string | null;
}

/**
 * Finishes what a crash interrupted in a folder of rotated files `<prefix>NNNN<ext>`: removes
 * half-written `.gz.tmp` files, and where a number exists both plain and compressed drops the
 * compressed copy (the plain file is the original). Returns the paths of the plain files
 * numbered below `before`, which are closed and may be compressed again.
 */
export async function settleRotated(
  dir: string,
  prefix: string,
  ext: string,
  before: number,
): Promise<string[]> {
  const esc = (s: string): string => s.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
  const re = new RegExp(`^${esc(prefix)}(\\d{4,})${esc(ext)}(${esc(GZ_EXT)}|${esc(GZ_TMP_EXT)})?$`);
  const found = new Map<number, Rotated>();
  for (const name of await readdir(dir)) {
    const m = re.exec(name);
    if (!m) continue;
    if (m[2] === GZ_TMP_EXT) {
      await rm(join(dir, name), { force: true });
      continue;
    }
    const index = Number(m[1]);
    const r = found.get(index) ?? { index, plain: null, gz: null };
    if (m[2] === GZ_EXT) r.gz = name;
    else r.plain = name;
    found.set(index, r);
  }
  const closed: string[] = [];
  for (const r of [...found.values()].sort((a, b) => a.index - b.index)) {
    if (r.plain === null) continue;
    if (r.gz !== null) await rm(join(dir, r.gz));
    if (r.index < before) closed.push(join(dir, r.plain));
  }
  return closed;
}
