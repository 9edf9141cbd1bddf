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
  /** The rig's counters at the last logged frame, for the frames lost across the resume. */
  seq: ResumeSeq | null;
  /** Number of the sample file to write next (a fresh file: the last one may end mid-row). */
  nextIndex: number;
  /** Bytes of a row cut off by the interruption, removed from the last file. */
  cutBytes: number;
}

export interface ResumeSeq {
  seq: number;
  tickMs: number;
  hostS: number;
  /** Host ms per frame sequence step since the rig last restarted, or null with too few rows. */
  msPerFrame: number | null;
}

/** Follows the rows' sequence numbers since the rig's last restart, for its frame rate. */
class SeqTrack {
  private start: { hostS: number; seqU: number } | null = null;
  private seqU = 0;
  private last: { seq: number; tickMs: number; hostS: number } | null = null;

  add(seq: number, tickMs: number, hostS: number): void {
    const prev = this.last;
    if (prev === null || tickMs < prev.tickMs) {
      this.seqU = seq;
      this.start = { hostS, seqU: seq };
    } else this.seqU += (seq - prev.seq + 65536) % 65536;
    this.last = { seq, tickMs, hostS };
  }

  result(): ResumeSeq | null {
    if (this.last === null || this.start === null) return null;
    const steps = this.seqU - this.start.seqU;
    const msPerFrame = steps > 0 ? ((this.last.hostS - this.start.hostS) * 1000) / steps : null;
    return { ...this.last, msPerFrame };
  }
}

/**
 * Frames the rig sent while no daemon was logging, from the first frame after a resume. The
 * rig still counting from before (its tick counter went on): the sequence step, its 65 536
 * wraps resolved by the time down. The rig restarted meanwhile (its tick counter went back):
 * the step means nothing, so the count is estimated from the time down and the frame rate.
 */
export function framesLostAcrossResume(
  last: ResumeSeq,
  first: { seq: number; tickMs: number; hostS: number },
): { count: number; estimated: boolean } {
  const downMs = (first.hostS - last.hostS) * 1000;
  const expected =
    last.msPerFrame !== null && last.msPerFrame > 0 ? downMs / last.msPerFrame : null;
  if (first.tickMs < last.tickMs) {
    return {
      count: expected === null ? 0 : Math.max(0, Math.round(expected) - 1),
      estimated: true,
    };
  }
  const step = (first.seq - last.seq + 65536) % 65536;
  const wraps = expected === null ? 0 : Math.max(0, Math.round((expected - step) / 65536));
  return { count: Math.max(0, step + wraps * 65536 - 1), estimated: false };
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
  const seqs = new SeqTrack();
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
    seqs.add(r.seq, r.tickMs, r.hostS);
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
    seq: seqs.result(),
    nextIndex: (numbers.length ? Math.max(...numbers) : 0) + 1,
    cutBytes,
  };
}
