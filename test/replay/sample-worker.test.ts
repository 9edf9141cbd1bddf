import { cp, mkdtemp, readdir, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { gzipSync } from 'node:zlib';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { demoScenario, simulateRun, type SimRun } from '../report/sim-run.js';

/*
 * The worker thread runs from the built package (its script is JavaScript), so these tests use
 * the build, as the command does: `npm test` builds it first. Each checks the worker's rows,
 * reports and faults against the same folder read on the test's own thread.
 */
type RunFolderModule = typeof import('../../src/replay/run-folder.js');
type ClientModule = typeof import('../../src/replay/sample-worker-client.js');
const built = (rel: string): string => new URL(`../../dist/replay/${rel}`, import.meta.url).href;

let folders: RunFolderModule;
let client: ClientModule;
let root: string;
let run: SimRun;
let copies = 0;

beforeAll(async () => {
  folders = (await import(built('run-folder.js'))) as RunFolderModule;
  client = (await import(built('sample-worker-client.js'))) as ClientModule;
  root = await mkdtemp(join(tmpdir(), 'cv-worker-'));
  run = await simulateRun({
    dir: join(root, 'run'),
    scenario: demoScenario(),
    rotateBytes: 20_000,
  });
}, 60_000);

afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

async function copy(): Promise<string> {
  const dir = join(root, `copy-${++copies}`);
  await cp(run.folder, dir, { recursive: true });
  return dir;
}

/**
 * What a reading hands out, in order: each row as text, each cut line, the bytes, the fault.
 * Read on this thread (0), on that many workers, or (-1) by the run folder's own choice forced
 * to workers.
 */
async function reading(dir: string, workers: number): Promise<string[]> {
  const opened = await folders.openRunFolder(dir);
  const seen: string[] = [];
  let bytes = 0;
  const o = {
    onBytes: (n: number) => (bytes += n),
    onCutLine: (c: { file: string; line: number }) => seen.push(`cut ${c.file}:${c.line}`),
  };
  const visit = (r: object): void => void seen.push(JSON.stringify(r));
  const source = {
    dir: opened.dir,
    channel: opened.manifest.channel,
    sampleFiles: opened.sampleFiles,
    lastFile: opened.sampleFiles.at(-1)!.name,
  };
  try {
    // Batches of 50 rows: a small run crosses many batches and each worker's window of four.
    if (workers < 0) await folders.forEachRunSample(opened, { ...o, worker: true }, visit);
    else if (workers > 0)
      await client.forEachRowInWorkers(source, o, visit, { workers, batchRows: 50 });
    else await folders.forEachRunSample(opened, { ...o, worker: false }, visit);
  } catch (e) {
    const err = e as Error & { code?: string };
    seen.push(`fault ${err.constructor.name} ${err.code} ${err.message}`);
  }
  seen.push(`bytes ${bytes}`);
  return seen;
}

describe('sample rows read on a worker thread', () => {
  it('the worker script is in the build', () => {
    expect(client.workerAvailable()).toBe(true);
  });

  it('the same rows in the same order, with compressed files and a cut last row', async () => {
    const dir = await copy();
    const files = (await readdir(dir)).filter((n) => n.startsWith('samples-')).sort();
    for (const name of files.slice(1, 4)) {
      await writeFile(join(dir, `${name}.gz`), gzipSync(await readFile(join(dir, name))));
      await rm(join(dir, name));
    }
    const last = join(dir, files.at(-1)!);
    const text = await readFile(last, 'utf8');
    await writeFile(last, text.slice(0, text.length - 40));
    const here = await reading(dir, 0);
    expect(here.length).toBeGreaterThan(run.result.frames_accepted);
    expect(here.filter((s) => s.startsWith('cut '))).toHaveLength(1);
    for (const workers of [1, 2, 3, -1]) expect(await reading(dir, workers)).toEqual(here);
  });

  it('a damaged row: the rows before it, then the same error', async () => {
    const dir = await copy();
    const name = (await readdir(dir)).filter((n) => n.startsWith('samples-')).sort()[2]!;
    const lines = (await readFile(join(dir, name), 'utf8')).split('\n');
    lines[77] = lines[77]!.replace(/,01,/, ',zz,');
    await writeFile(join(dir, name), lines.join('\n'));
    const here = await reading(dir, 0);
    expect(here.at(-2)).toMatch(/^fault CellvigilError CV_RUN_DATA .*line 78/);
    for (const workers of [1, 2]) expect(await reading(dir, workers)).toEqual(here);
  });

  it('a visitor that throws stops the reading with its error', async () => {
    const opened = await folders.openRunFolder(run.folder);
    const source = {
      dir: opened.dir,
      channel: opened.manifest.channel,
      sampleFiles: opened.sampleFiles,
      lastFile: opened.sampleFiles.at(-1)!.name,
    };
    let rows = 0;
    const visit = (): void => {
      if (++rows === 120) throw new Error('visitor fault');
    };
    await expect(client.forEachRowInWorkers(source, {}, visit, { batchRows: 50 })).rejects.toThrow(
      'visitor fault',
    );
    expect(rows).toBe(120);
  });
});
