import { VirtualClock, type Clock, type TimerHandle } from './clock.js';

/*
 * The clocks that run on the host's real timers; the pure `Clock` interface and `VirtualClock`
 * stay in clock.ts so the core never reaches a timer.
 */

/** Host clock: performance.now() for intervals, Date.now() only to label. */
export class HostClock implements Clock {
  private readonly timers = new Map<number, NodeJS.Timeout>();
  private nextId = 1;

  now(): number {
    return performance.now();
  }

  wallNow(): number {
    return Date.now();
  }

  setTimer(fn: () => void, ms: number, repeat = false): TimerHandle {
    const id = this.nextId++;
    const t = repeat
      ? setInterval(fn, ms)
      : setTimeout(() => {
          this.timers.delete(id);
          fn();
        }, ms);
    this.timers.set(id, t);
    return { id };
  }

  clearTimer(handle: TimerHandle): void {
    const t = this.timers.get(handle.id);
    if (t) {
      clearTimeout(t);
      this.timers.delete(handle.id);
    }
  }
}

/**
 * Drives a VirtualClock from real timers at `speed` times real time, so an accelerated
 * simulated discharge still lets I/O (logs, the live feed) run between steps.
 */
export class PacedClock extends VirtualClock {
  private pacer: NodeJS.Timeout | null = null;

  start(speed: number, stepMs = 20): void {
    if (this.pacer) return;
    let last = performance.now();
    this.pacer = setInterval(() => {
      const nowReal = performance.now();
      this.advance((nowReal - last) * speed);
      last = nowReal;
    }, stepMs);
  }

  stop(): void {
    if (this.pacer) clearInterval(this.pacer);
    this.pacer = null;
  }
}
