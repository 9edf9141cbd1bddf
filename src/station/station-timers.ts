import type { Clock, TimerHandle } from '../core/clock.js';
import { HostClock } from '../core/host-clock.js';

/** What the station's timers call on one channel's run. */
export interface TimedChannel {
  /** The session's tick (timeouts, the heartbeat's deadline), on measurement time. */
  tick(): void;
  /** Writes the channel's queued sample and event rows to their files. */
  flush(): Promise<void>;
  /** Syncs the channel's logs, replaces its checkpoint (and checks its rig clock). */
  checkpoint(): void;
  /** Redraws the channel's status line. */
  draw(realNowMs: number): void;
}

/**
 * A one-channel run's own periods, kept here so a station's channel sees the same: a tick every
 * 100 ms, the status every 250 ms (one pass), a flush every 1 s (4 passes), a checkpoint every
 * 5 s (20 passes).
 */
const TICK_MS = 100;
const PASS_MS = 250;
const FLUSH_EVERY_PASSES = 4;
const CHECKPOINT_EVERY_PASSES = 20;

interface TickGroup {
  clock: Clock;
  handle: TimerHandle;
  runs: Set<TimedChannel>;
}

/**
 * One set of timers for every channel of a station instead of four per channel: one tick timer
 * per clock (the simulated rigs' virtual clock, the host's for real rigs) and one pass every
 * 250 ms on the host's that redraws every status, writes a quarter of the channels' logs and
 * syncs and checkpoints a twentieth of them. Each channel keeps a run's periods (logs written
 * every second, synced with a checkpoint every 5 s), and no turn of the event loop takes the
 * whole station's writes at once. A timer runs only while some channel has joined it, so an
 * idle station holds no timer.
 */
export class StationTimers {
  private readonly ticks: TickGroup[] = [];
  /** Each channel's place in the checkpoint rotation. */
  private readonly runs = new Map<TimedChannel, number>();
  private realHandles: TimerHandle[] = [];
  private pass = 0;
  private nextPlace = 0;

  constructor(private readonly real: Clock = new HostClock()) {}

  /** Takes a run in (its tick on `clock`; null: host time); the function returned takes it out. */
  join(run: TimedChannel, clock: Clock | null): () => void {
    const group = this.tickGroup(clock ?? this.real);
    group.runs.add(run);
    this.runs.set(run, this.nextPlace++ % CHECKPOINT_EVERY_PASSES);
    if (this.realHandles.length === 0) this.startReal();
    let joined = true;
    return () => {
      if (!joined) return;
      joined = false;
      group.runs.delete(run);
      this.runs.delete(run);
      if (group.runs.size === 0) {
        group.clock.clearTimer(group.handle);
        this.ticks.splice(this.ticks.indexOf(group), 1);
      }
      if (this.runs.size === 0) this.stopReal();
    };
  }

  private tickGroup(clock: Clock): TickGroup {
    const found = this.ticks.find((g) => g.clock === clock);
    if (found) return found;
    const runs = new Set<TimedChannel>();
    const handle = clock.setTimer(
      () => {
        for (const r of [...runs]) r.tick();
      },
      TICK_MS,
      true,
    );
    const group = { clock, handle, runs };
    this.ticks.push(group);
    return group;
  }

  private startReal(): void {
    const every = (ms: number, fn: () => void): void => {
      this.realHandles.push(this.real.setTimer(fn, ms, true));
    };
    every(PASS_MS, () => this.realPass());
  }

  private stopReal(): void {
    for (const h of this.realHandles) this.real.clearTimer(h);
    this.realHandles = [];
  }

  /**
   * Every status redrawn; the channels whose turn it is flushed (a channel's checkpoint pass is
   * one of its flush passes, so the checkpoint follows rows already on their way to the disk).
   */
  private realPass(): void {
    const turn = this.pass++ % CHECKPOINT_EVERY_PASSES;
    const now = this.real.now();
    for (const [run, place] of [...this.runs]) {
      run.draw(now);
      if (place % FLUSH_EVERY_PASSES === turn % FLUSH_EVERY_PASSES) void run.flush();
      if (place === turn) run.checkpoint();
    }
  }
}
