import type { Rng } from './prng.js';

/** Link faults the simulated rig can inject, to exercise the host's handling of a noisy line. */
export interface FaultOptions {
  /** Chance per frame that it is lost (its sequence number is still used up). */
  dropProbability: number;
  /** Chance per frame that a garbage line precedes it. */
  garbageProbability: number;
  /** Frames collected before one write; >1 imitates a USB bridge delivering lines in clumps. */
  burstFrames: number;
}

/**
 * Faults of the rig's own circuit, at moments of true time since the rig booted, to exercise
 * the host's checks of readings that cannot be true.
 */
export interface CircuitFaults {
  /** From this moment the load circuit is open (a blown fuse): no current flows, the load flag stays on. */
  openLoadAtMs?: number;
  /** Within this window the voltage channel reads a fixed count (a broken divider wire). */
  voltageSense?: { fromMs: number; toMs: number; counts: number };
}

export const NO_FAULTS: FaultOptions = {
  dropProbability: 0,
  garbageProbability: 0,
  burstFrames: 1,
};

// Bytes line noise tends to produce; no '|' (so a junk line never carries a checksum field) and no newline.
const JUNK_CHARS = 'D,0123456789ABCDEF\x00\x01\x07\x1b\x7f~#@';

export class FaultInjector {
  constructor(
    private readonly opts: FaultOptions,
    private readonly rng: Rng,
  ) {
    for (const key of ['dropProbability', 'garbageProbability'] as const) {
      const p = opts[key];
      if (!(p >= 0 && p <= 1)) throw new RangeError(`${key} must be within 0..1, got ${p}`);
    }
    if (!Number.isInteger(opts.burstFrames) || opts.burstFrames < 1) {
      throw new RangeError(`burstFrames must be a whole number >= 1, got ${opts.burstFrames}`);
    }
  }

  get burstFrames(): number {
    return this.opts.burstFrames;
  }

  dropFrame(): boolean {
    return this.opts.dropProbability > 0 && this.rng() < this.opts.dropProbability;
  }

  /**
   * A garbage line (with its `\n`) to send before `frame`, or null. Half are random junk, half
   * are the frame itself with one character corrupted in transit, so its checksum fails.
   */
  garbageBefore(frame: string): string | null {
    if (!(this.opts.garbageProbability > 0 && this.rng() < this.opts.garbageProbability))
      return null;
    if (this.rng() < 0.5) {
      const n = 1 + Math.floor(this.rng() * 40);
      let s = '';
      for (let k = 0; k < n; k++) s += JUNK_CHARS[Math.floor(this.rng() * JUNK_CHARS.length)];
      return `${s}\n`;
    }
    const body = frame.slice(0, frame.lastIndexOf('|'));
    const pos = 2 + Math.floor(this.rng() * (body.length - 2));
    const old = body[pos]!;
    // Flip a digit to another digit (or a comma to a digit): the line still looks right, the CRC does not.
    const swapped = old === '9' ? '8' : /[0-8]/.test(old) ? String(Number(old) + 1) : '7';
    return `${body.slice(0, pos)}${swapped}${frame.slice(body.length)}`;
  }
}
