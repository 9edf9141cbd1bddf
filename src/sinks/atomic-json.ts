import { open, rename } from 'node:fs/promises';

/** Numbers temporary files: two writes of one path in flight must not share (and truncate) one. */
let tmpCount = 0;

/** Replaces a JSON file atomically: write a temporary file, fsync it, rename it over the old one. */
export async function writeJsonAtomic(path: string, value: unknown): Promise<void> {
  const tmp = `${path}.${process.pid}.${++tmpCount}.tmp`;
  const fh = await open(tmp, 'w');
  try {
    await fh.write(JSON.stringify(value, null, 2) + '\n');
    await fh.sync();
  } finally {
    await fh.close();
  }
  await rename(tmp, path);
}
