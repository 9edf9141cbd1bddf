import { randomBytes } from 'node:crypto';
import { open, rename } from 'node:fs/promises';

/** Replaces a JSON file atomically: write a temporary file, sync its data, rename it over the old one. */
export async function writeJsonAtomic(path: string, value: unknown): Promise<void> {
  // A name of its own: two writes of one path in flight must not share (and truncate) one file.
  const tmp = `${path}.${process.pid}.${randomBytes(6).toString('hex')}.tmp`;
  const fh = await open(tmp, 'w');
  try {
    await fh.write(JSON.stringify(value, null, 2) + '\n');
    // The data and the size are what the rename must not overtake; timestamps need no sync.
    await fh.datasync();
  } finally {
    await fh.close();
  }
  await rename(tmp, path);
}
