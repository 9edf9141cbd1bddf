import { readFile, stat } from 'node:fs/promises';
import { join } from 'node:path';
import { writeJsonAtomic } from '../sinks/atomic-json.js';

/**
 * Which run folder each channel of a station is writing, kept beside the run folders and
 * replaced atomically at every start and end. After a crash or power loss the station reads it
 * back and resumes every channel whose folder has no result yet.
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

  /** The folder a channel was writing when the daemon stopped, if that run never finished. */
  async unfinished(key: string): Promise<string | null> {
    const folder = this.current.get(key);
    if (folder === undefined) return null;
    const exists = (p: string) =>
      stat(p).then(
        () => true,
        () => false,
      );
    if (!(await exists(join(folder, 'manifest.json')))) return null;
    return (await exists(join(folder, 'result.json'))) ? null : folder;
  }

  set(key: string, folder: string | null): Promise<void> {
    if (folder === null) this.current.delete(key);
    else this.current.set(key, folder);
    const snapshot = {
      format: 'cellvigil-station-index',
      channels: Object.fromEntries(this.current),
    };
    // One write at a time, each with everything known when it starts.
    this.writing = this.writing
      .then(() => writeJsonAtomic(this.path, snapshot))
      .catch(() => undefined);
    return this.writing;
  }
}
