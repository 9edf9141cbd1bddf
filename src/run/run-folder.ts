import { mkdir } from 'node:fs/promises';
import { join } from 'node:path';
import { ErrorCodes, makeError } from '../core/errors.js';

/** `[A-Za-z0-9._-]`, other characters become `-`; empty becomes `run`. */
export function safeLabel(label: string): string {
  const s = label
    .replace(/[^A-Za-z0-9._-]+/g, '-')
    .replace(/^[-.]+|-+$/g, '')
    .slice(0, 60);
  return s === '' ? 'run' : s;
}

/** Local wall time as YYYYMMDD-HHMMSS: folders sort by start and read naturally. */
export function folderStamp(wallMs: number): string {
  const d = new Date(wallMs);
  const p = (n: number): string => String(n).padStart(2, '0');
  return `${d.getFullYear()}${p(d.getMonth() + 1)}${p(d.getDate())}-${p(d.getHours())}${p(d.getMinutes())}${p(d.getSeconds())}`;
}

/** Makes a new, empty run folder; never reuses an existing one (a second run in the same second gets a suffix). */
export async function createRunFolder(
  runsDir: string,
  label: string,
  wallMs: number,
): Promise<string> {
  const base = `${folderStamp(wallMs)}-${safeLabel(label)}`;
  try {
    await mkdir(runsDir, { recursive: true });
    for (let n = 1; n < 1000; n++) {
      const path = join(runsDir, n === 1 ? base : `${base}-${n}`);
      try {
        await mkdir(path);
        return path;
      } catch (e) {
        if ((e as NodeJS.ErrnoException).code !== 'EEXIST') throw e;
      }
    }
    throw new Error('a thousand folders of that name already exist');
  } catch (e) {
    throw makeError(
      ErrorCodes.RUN_FOLDER,
      `cannot create the run folder: ${(e as Error).message}`,
      `--runs ${runsDir}`,
      'Choose a folder you can write to with free space (--runs <dir>). Nothing was switched on.',
    );
  }
}
