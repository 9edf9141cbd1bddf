import { watch, type FSWatcher } from 'chokidar';

/**
 * Calls `changed` after a watched file was written and has stayed the same for a moment, so a
 * half-written file is seldom seen (and when it is, the caller's validation rejects it).
 */
export function watchFile(path: string, changed: () => void): { close(): Promise<void> } {
  const w: FSWatcher = watch(path, {
    ignoreInitial: true,
    awaitWriteFinish: { stabilityThreshold: 150, pollInterval: 50 },
  });
  w.on('change', changed);
  w.on('add', changed);
  // A watcher error (the folder removed) must not end a discharge; the old settings stay.
  w.on('error', () => undefined);
  return { close: () => w.close() };
}
