import type { Clock, TimerHandle } from '../core/clock.js';
import { HostClock } from '../core/host-clock.js';

/** What the station's timers call on one channel's run. */
export interface TimedChannel {
  /** The session's tick (timeouts, the heartbeat's deadline), on measurement time. */
  tick(): void;
  /** Writes and syncs the channel's queued sample and event rows. */
  flush(): Promise<void>;
  /** Replaces the channel's checkpoint (and checks its rig clock). */
  checkpoint(): void;
  /** Redraws the channel's status line. */
  draw(realNowMs: number): void;
}

/** A one-channel run's own periods, kept here so a station's channel sees the same. */
const TICK_MS = 100;
const FLUSH_EVERY_MS = 1000;
/** Every channel's checkpoint every 5 flush passes (5 s), a fifth of the channels per pass. */
const CHECKPOINT_EVERY_PASSES = 5;
const STATUS_EVERY_MS = 250;

interface TickGroup {
  clock: Clock;
  handle: TimerHandle;
  runs: Set<TimedChannel>;
}

/**
 * One set of timers for every channel of a station instead of four per channel: one tick timer
 * per clock (the simulated rigs' virtual clock, the host's for real rigs), one flush pass a
 * second writing and syncing every channel's logs, checkpoints staggered over those passes (each
 * channel still every 5 s, but a fifth of the channels per pass), one status timer. A timer
 * runs only while some channel has joined it, so an idle station holds no timer.
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
    every(FLUSH_EVERY_MS, () => this.flushPass());
    every(STATUS_EVERY_MS, () => {
      const now = this.real.now();
      for (const r of this.runs.keys()) r.draw(now);
    });
  }

  private stopReal(): void {
    for (const h of this.realHandles) this.real.clearTimer(h);
    this.realHandles = [];
  }

  /** Every channel's rows written and synced; this pass's fifth of the channels checkpointed. */
  private flushPass(): void {
    const turn = this.pass++ % CHECKPOINT_EVERY_PASSES;
    for (const [run, place] of [...this.runs]) {
      void run.flush();
      if (place === turn) run.checkpoint();
    }
  }
}
