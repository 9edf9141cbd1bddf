import { readFile, stat } from 'node:fs/promises';
import { join } from 'node:path';
import { writeJsonAtomic } from '../sinks/atomic-json.js';

/**
 * Which run folder each channel of a station wrote last, kept beside the run folders and
 * replaced atomically at every start. After a crash or power loss the station reads it back:
 * a channel whose folder has no result yet is resumed; one whose run had ended waits for a
 * start (its cell is discharged; a new run needs a fresh cell).
 */
export class RunIndex {
  private readonly current = new Map<string, string>();
  private writing: Promise<void> = Promise.resolve();

  constructor(readonly path: string) {}

  /** The index of a station file's runs in `runs`. */
  static for(runs: string, stationName: string): RunIndex {
    return new RunIndex(join(runs, `station-${stationName}.json`));
  }

  /** Reads what a previous daemon left; a missing or unreadable index resumes nothing. */
  async load(): Promise<void> {
    try {
      const data = JSON.parse(await readFile(this.path, 'utf8')) as { channels?: unknown };
      const channels = data.channels;
      if (typeof channels !== 'object' || channels === null) return;
      for (const [key, folder] of Object.entries(channels))
        if (typeof folder === 'string') this.current.set(key, folder);
    } catch {
      // Nothing to resume.
    }
  }

  /**
   * A channel's last run: its folder and whether it is unfinished (no result: resume it), or
   * null when the channel has none (or its folder is gone).
   */
  async last(key: string): Promise<{ folder: string; unfinished: boolean } | null> {
    const folder = this.current.get(key);
    if (folder === undefined) return null;
    const exists = (p: string) =>
      stat(p).then(
        () => true,
        () => false,
      );
    if (!(await exists(join(folder, 'manifest.json')))) return null;
    return { folder, unfinished: !(await exists(join(folder, 'result.json'))) };
  }

  /** Records the folder a channel now writes; rejects when the write fails. */
  set(key: string, folder: string): Promise<void> {
    this.current.set(key, folder);
    const snapshot = {
      format: 'cellvigil-station-index',
      channels: Object.fromEntries(this.current),
    };
    // One write at a time, in order; a failed write does not hold up the next.
    const next = this.writing.then(() => writeJsonAtomic(this.path, snapshot));
    this.writing = next.catch(() => undefined);
    return next;
  }
}
