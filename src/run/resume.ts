/**
 * Picking up an interrupted run from its folder. The sample log is the truth: totals, load-on
 * time and the last frame come from its rows; the checkpoint only supplies the counters that
 * rows do not hold (rejected and lost frames).
 */
import { open, readdir, stat } from 'node:fs/promises';
import { join } from 'node:path';
import { ErrorCodes, makeError } from '../core/errors.js';
import { FLAG_LOAD_ON } from '../protocol/messages.js';
import {
  openRunFolder,
  readRunSamples,
  type CutLine,
  type RunFolder,
} from '../replay/run-folder.js';

export interface ResumePoint {
  run: RunFolder;
  totals: { chargeAh: number; energyWh: number; onMs: number; bridgedAh: number };
  rows: number;
  lastHostS: number;
  lastWallMs: number;
  /** The last logged frame: was the load on, and what flowed. */
  last: { loadOn: boolean; volts: number; amps: number } | null;
  counters: { rejected: number; lost: number };
  /** Number of the sample file to write next (a fresh file: the last one may end mid-row). */
  nextIndex: number;
  /** Bytes of a row cut off by the interruption, removed from the last file. */
  cutBytes: number;
}

/** Removes a partial last row so the file ends on a line end; returns the bytes removed. */
async function trimPartialRow(path: string): Promise<number> {
  const fh = await open(path, 'r+');
  try {
    const size = (await fh.stat()).size;
    const tail = Buffer.alloc(Math.min(size, 4096));
    await fh.read(tail, 0, tail.length, size - tail.length);
    const nl = tail.lastIndexOf(0x0a);
    const keep = nl < 0 ? size - tail.length : size - tail.length + nl + 1;
    if (keep === size) return 0;
    await fh.truncate(keep);
    await fh.sync();
    return size - keep;
  } finally {
    await fh.close();
  }
}

export async function findResumePoint(dir: string): Promise<ResumePoint> {
  let run = await openRunFolder(dir);
  if (run.result !== null) {
    throw makeError(
      ErrorCodes.USAGE,
      `the run already ended (${run.result.end_reason}); it has a result.json`,
      dir,
      'Start a new run instead; `cellvigil report` recomputes a finished one.',
    );
  }
  const last = run.sampleFiles.at(-1);
  const cutBytes = last && !last.gzip ? await trimPartialRow(last.path) : 0;
  if (cutBytes > 0) run = await openRunFolder(dir);
  let rows = 0;
  let prev: { hostS: number; on: boolean } | null = null;
  let onMs = 0;
  let chargeAh = 0;
  let energyWh = 0;
  let lastHostS = 0;
  let lastWall = '';
  let lastFrame: ResumePoint['last'] = null;
  const cuts: CutLine[] = [];
  for await (const r of readRunSamples(run, { onCutLine: (c) => cuts.push(c) })) {
    const on = (r.flags & FLAG_LOAD_ON) !== 0;
    // The integrator's rule: the trapezoid of the on/off indicator.
    if (prev) onMs += (((on ? 1 : 0) + (prev.on ? 1 : 0)) / 2) * (r.hostS - prev.hostS) * 1000;
    prev = { hostS: r.hostS, on };
    chargeAh = r.chargeAh;
    energyWh = r.energyWh;
    lastHostS = r.hostS;
    lastWall = r.wallTime;
    lastFrame = { loadOn: on, volts: r.volts, amps: r.amps };
    rows++;
  }
  const cp = run.checkpoint;
  const names = await readdir(dir);
  const numbers = names
    .map((n) => /^samples-(\d{4,})\.csv(\.gz)?$/.exec(n)?.[1])
    .filter((x): x is string => x !== undefined)
    .map(Number);
  const lastWallMs =
    lastWall !== '' ? Date.parse(lastWall) : (await stat(join(dir, 'manifest.json'))).mtimeMs;
  return {
    run,
    totals: {
      chargeAh,
      energyWh,
      onMs,
      bridgedAh: cp?.bridged_Ah ?? 0,
    },
    rows,
    lastHostS,
    lastWallMs,
    last: lastFrame,
    counters: { rejected: cp?.frames_rejected ?? 0, lost: cp?.frames_lost ?? 0 },
    nextIndex: (numbers.length ? Math.max(...numbers) : 0) + 1,
    cutBytes,
  };
}
