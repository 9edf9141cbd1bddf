/**
 * Time is injected everywhere. `now()` is monotonic milliseconds and is the only time that
 * integrals use; `wallNow()` labels rows and files and may jump (NTP, a user changing the date).
 */
export interface Clock {
  now(): number;
  wallNow(): number;
  setTimer(fn: () => void, ms: number, repeat?: boolean): TimerHandle;
  clearTimer(handle: TimerHandle): void;
}

export interface TimerHandle {
  readonly id: number;
}

interface Scheduled {
  id: number;
  at: number;
  every: number | null;
  fn: () => void;
}

/**
 * A virtual clock for the simulated rig and for tests: time moves only when `advance` is
 * called, and timers fire in time order on the way.
 */
export class VirtualClock implements Clock {
  private t: number;
  private readonly wallAnchor: number;
  private queue: Scheduled[] = [];
  private nextId = 1;

  constructor(start = 0, wallAnchor = Date.UTC(2026, 0, 1)) {
    this.t = start;
    this.wallAnchor = wallAnchor - start;
  }

  now(): number {
    return this.t;
  }

  wallNow(): number {
    return this.wallAnchor + this.t;
  }

  setTimer(fn: () => void, ms: number, repeat = false): TimerHandle {
    const id = this.nextId++;
    this.insert({
      id,
      at: this.t + Math.max(0, ms),
      every: repeat ? Math.max(1e-3, ms) : null,
      fn,
    });
    return { id };
  }

  clearTimer(handle: TimerHandle): void {
    this.queue = this.queue.filter((s) => s.id !== handle.id);
  }

  /** Moves time forward by `ms`, firing every timer that falls due, in order. */
  advance(ms: number): void {
    const end = this.t + ms;
    for (;;) {
      const next = this.queue[0];
      if (!next || next.at > end) break;
      this.queue.shift();
      this.t = Math.max(this.t, next.at);
      if (next.every !== null) this.insert({ ...next, at: next.at + next.every });
      next.fn();
    }
    this.t = end;
  }

  private insert(s: Scheduled): void {
    let i = this.queue.length;
    while (i > 0 && this.queue[i - 1]!.at > s.at) i--;
    this.queue.splice(i, 0, s);
  }
}
