import type { HistoryPoint } from './live-types.js';

/**
 * The whole run's curve in at most `capacity` points. Every `stride`-th sample is kept; when
 * the store is full, every second kept point is dropped and the stride doubles, so the points
 * stay evenly spread over the run however long it lasts, and memory stays fixed.
 */
export class DownsampledHistory {
  private points: HistoryPoint[] = [];
  private strideValue = 1;
  private seen = 0;

  constructor(private readonly capacity: number) {
    if (!Number.isInteger(capacity) || capacity < 4)
      throw new RangeError(`history capacity must be an integer of at least 4, got ${capacity}`);
  }

  get stride(): number {
    return this.strideValue;
  }

  get size(): number {
    return this.points.length;
  }

  /** Whether the next sample is one to keep: a caller can skip making a point that would be dropped. */
  keepsNext(): boolean {
    return this.seen % this.strideValue === 0;
  }

  /** Counts a sample without its point (one keepsNext said is not kept). */
  skip(): void {
    this.seen++;
  }

  add(p: HistoryPoint): void {
    const keep = this.keepsNext();
    this.seen++;
    if (!keep) return;
    if (this.points.length >= this.capacity) {
      this.points = this.points.filter((_, i) => i % 2 === 0);
      this.strideValue *= 2;
      // The point in hand was picked with the old stride; keep it only if the new one picks it too.
      if ((this.seen - 1) % this.strideValue !== 0) return;
    }
    this.points.push(p);
  }

  /** A copy of the kept points, oldest first. */
  snapshot(): HistoryPoint[] {
    return this.points.slice();
  }

  clear(): void {
    this.points = [];
    this.strideValue = 1;
    this.seen = 0;
  }
}
