import { readdir, readFile, stat } from 'node:fs/promises';
import { join } from 'node:path';

/** An unfinished run older than this is not picked up by itself: it is more likely another cell by now. */
export const AUTO_RESUME_WITHIN_MS = 12 * 3600 * 1000;

/**
 * The newest run folder under `runsDir` that was on `port`, has no result.json and was written
 * to recently: the run a daemon was running when it died. Null when there is none.
 */
export async function findUnfinishedRun(
  runsDir: string,
  port: string,
  nowWallMs: number,
): Promise<string | null> {
  let names: string[];
  try {
    names = (await readdir(runsDir)).sort().reverse();
  } catch {
    return null;
  }
  for (const name of names) {
    const dir = join(runsDir, name);
    try {
      const manifest = JSON.parse(await readFile(join(dir, 'manifest.json'), 'utf8')) as {
        source?: { kind?: string; description?: string };
      };
      if (manifest.source?.kind !== 'serial' || manifest.source.description !== port) continue;
      const done = await stat(join(dir, 'result.json')).then(
        () => true,
        () => false,
      );
      if (done) return null;
      const touched = (await stat(join(dir, 'events.jsonl'))).mtimeMs;
      return nowWallMs - touched <= AUTO_RESUME_WITHIN_MS ? dir : null;
    } catch {
      continue;
    }
  }
  return null;
}
