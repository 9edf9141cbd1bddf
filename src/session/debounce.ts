/**
 * A condition that must hold for both a minimum time and a minimum number of consecutive
 * frames before it counts: one noisy frame never ends a run, a sustained one always does.
 */
export class Debounce {
  private since: number | null = null;
  private count = 0;

  constructor(
    private readonly holdMs: number,
    private readonly frames: number,
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
    return this.count >= this.frames && atMs - this.since >= this.holdMs;
  }

  reset(): void {
    this.since = null;
    this.count = 0;
  }
}
