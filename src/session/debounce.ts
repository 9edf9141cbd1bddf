/**
 * A condition that must hold for both a minimum time and a minimum number of consecutive
 * frames before it counts: one noisy frame never ends a run, a sustained one always does.
 */
export class Debounce {
  private since: number | null = null;
  private count = 0;

  constructor(
    private readonly holdMs: number,
    private readonly minFrames: number,
  ) {}

  /** Feeds one observation; returns true once the condition has been sustained. */
  update(active: boolean, atMs: number): boolean {
    if (!active) {
      this.since = null;
      this.count = 0;
      return false;
    }
    if (this.since === null) this.since = atMs;
    this.count++;
    return this.count >= this.minFrames && atMs - this.since >= this.holdMs;
  }

  /** Consecutive frames the condition has held so far. */
  get frames(): number {
    return this.count;
  }

  /** How long the condition has held at `atMs` (0 when it does not). */
  heldMs(atMs: number): number {
    return this.since === null ? 0 : atMs - this.since;
  }

  reset(): void {
    this.since = null;
    this.count = 0;
  }
}
