/**
 * A worker thread that reads and parses some of a large run's sample files while the thread
 * that started it visits the rows (sample-worker-client.ts). It reads with the same code as
 * the caller's thread would, and sends each file's rows and cut line, then the file's end, or
 * the fault that stopped it. At most WINDOW batches wait unvisited: a worker ahead of its
 * reader stops reading.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { errorShape, RowPacker, type RowsMessage, type WorkerMessage } from './sample-batch.js';
import { SampleReader } from './sample-csv.js';
import { visitRunSamples, type SampleSource } from './sample-visit.js';

const WINDOW = 4;

async function readAll(source: SampleSource, batchRows: number): Promise<void> {
  const port = parentPort!;
  let credits = WINDOW;
  let wake: (() => void) | null = null;
  port.on('message', () => {
    credits++;
    wake?.();
    wake = null;
  });
  let bytes = 0;
  const post = (m: WorkerMessage, transfer: ArrayBuffer[] = []): void => {
    port.postMessage(m, transfer);
    bytes = 0;
  };
  const reader = new SampleReader();
  const send = (m: RowsMessage, transfer: ArrayBuffer[]): void => {
    credits--;
    post({ ...m, bytes }, transfer);
  };
  const packer = new RowPacker(send, reader, batchRows);
  const read = {
    onBytes: (n: number) => (bytes += n),
    onCutLine: (cut: { file: string; line: number }) => {
      packer.flush();
      post({ kind: 'cut', cut, bytes });
    },
  };
  try {
    for (const file of source.sampleFiles) {
      const one = { ...source, sampleFiles: [file] };
      for await (const _ of visitRunSamples(one, read, (row) => packer.add(row), reader))
        while (credits <= 0) await new Promise<void>((r) => (wake = r));
      packer.flush();
      post({ kind: 'file-done', bytes });
    }
  } catch (e) {
    // The rows read before the fault go out before it, as on the caller's thread.
    packer.flush();
    post({ kind: 'error', error: errorShape(e), bytes });
  }
}

const given = workerData as { source: SampleSource; batchRows: number };
void readAll(given.source, given.batchRows);
