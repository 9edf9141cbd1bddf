/**
 * Visits a run's rows read on worker threads (sample-worker.ts): the files are read and parsed
 * there (with several workers, every n-th file by each) while this thread measures the rows,
 * in file order. On a run of millions of rows the parsing then no longer adds to a recompute's
 * time.
 */
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import { BATCH_ROWS, errorFrom, RowUnpacker, type WorkerMessage } from './sample-batch.js';
import { blankSampleRecord, type SampleRecord } from './sample-csv.js';
import type { SampleReadOptions, SampleSource } from './sample-visit.js';

const WORKER_URL = new URL('./sample-worker.js', import.meta.url);

/** Whether the workers' script is there: it is in the built package, not beside the sources. */
export function workerAvailable(): boolean {
  return existsSync(fileURLToPath(WORKER_URL));
}

export interface WorkerReadOptions {
  /** Worker threads, each reading every n-th file. @default 1 */
  workers?: number;
  /** Rows per batch: smaller in tests, to cross many batches on a small run. */
  batchRows?: number;
}

interface Lane {
  worker: Worker;
  /** Messages of files not visited yet: at most the worker's window of batches. */
  queue: WorkerMessage[];
  rows: RowUnpacker;
}

export function forEachRowInWorkers(
  source: SampleSource,
  o: SampleReadOptions,
  visit: (row: Readonly<SampleRecord>) => void,
  w: WorkerReadOptions = {},
): Promise<void> {
  const files = source.sampleFiles;
  if (files.length === 0) return Promise.resolve();
  const n = Math.max(1, Math.min(w.workers ?? 1, files.length));
  const batchRows = w.batchRows ?? BATCH_ROWS;
  return new Promise((resolve, reject) => {
    const lanes: Lane[] = Array.from({ length: n }, (_, j) => ({
      worker: new Worker(WORKER_URL, {
        workerData: {
          source: { ...source, sampleFiles: files.filter((_, k) => k % n === j) },
          batchRows,
        },
      }),
      queue: [],
      rows: new RowUnpacker(),
    }));
    const row = blankSampleRecord();
    /** The file whose rows are being visited, by its place in `files`. */
    let current = 0;
    let settled = false;
    const end = (e?: Error): void => {
      if (settled) return;
      settled = true;
      for (const lane of lanes) void lane.worker.terminate();
      if (e) reject(e);
      else resolve();
    };
    // The lane of the current file is visited as far as it has come; the others wait.
    const drain = (): void => {
      while (!settled) {
        const lane = lanes[current % n]!;
        const m = lane.queue.shift();
        if (m === undefined) return;
        if (m.bytes > 0) o.onBytes?.(m.bytes);
        if (m.kind === 'rows') {
          lane.rows.take(m, row, visit);
          lane.worker.postMessage('visited');
        } else if (m.kind === 'cut') o.onCutLine?.(m.cut);
        else if (m.kind === 'file-done') {
          if (++current === files.length) end();
        } else end(errorFrom(m.error));
      }
    };
    for (const lane of lanes) {
      lane.worker.on('message', (m: WorkerMessage) => {
        if (settled) return;
        lane.queue.push(m);
        try {
          drain();
        } catch (e) {
          // The visitor's own fault: the reading stops with it.
          end(e as Error);
        }
      });
      lane.worker.on('error', (e) => end(e));
      lane.worker.on('exit', (code) =>
        end(new Error(`a worker reading the sample files stopped (exit code ${code})`)),
      );
    }
  });
}
