import { randomBytes } from 'node:crypto';
import { constants } from 'node:fs';
import { open, rename } from 'node:fs/promises';

/**
 * The temporary file is opened so that its write returns only once the bytes and the size are
 * on the disk (O_DSYNC): one call on the thread pool fewer than a write and a sync, for a file
 * a station replaces every few seconds per channel. Where the flag is unknown (Windows), the
 * write is followed by fdatasync.
 */
const SYNCED_CREATE =
  constants.O_DSYNC === undefined
    ? null
    : constants.O_WRONLY | constants.O_CREAT | constants.O_TRUNC | constants.O_DSYNC;

/** Replaces a JSON file atomically: write a temporary file, sync its data, rename it over the old one. */
export async function writeJsonAtomic(path: string, value: unknown): Promise<void> {
  // A name of its own: two writes of one path in flight must not share (and truncate) one file.
  const tmp = `${path}.${process.pid}.${randomBytes(6).toString('hex')}.tmp`;
  const fh = await open(tmp, SYNCED_CREATE ?? 'w');
  try {
    await fh.writeFile(JSON.stringify(value, null, 2) + '\n');
    // The data and the size are what the rename must not overtake; timestamps need no sync.
    if (SYNCED_CREATE === null) await fh.datasync();
  } finally {
    await fh.close();
  }
  await rename(tmp, path);
}
