import type { Clock } from '../core/clock.js';
import type { ControlReply, StationControlRequest } from '../live/live-types.js';
import type { StationFeed } from '../live/station-feed.js';
import { decodeRigLine } from '../protocol/codec.js';
import type { Source } from '../sources/source.js';
import type { ChannelOutcome, ChannelRun, ChannelRunner } from './channel-runner.js';
import { RunIndex } from './run-index.js';
import { SharedRigLink } from './shared-link.js';
import { StationTimers } from './station-timers.js';
import { channelKey, type ChannelPlan, type RigPlan, type StationPlan } from './station-types.js';

export interface StationOptions {
  plan: StationPlan;
  /** The station's name: its index file in `runs` is station-<name>.json. */
  name: string;
  runs: string;
  runner: ChannelRunner;
  /** The port (or simulated rig) of a rig; opened once, shared by its channels. */
  makeSource(rig: RigPlan): Source;
  /** The virtual clock simulated rigs run on; null for real rigs. */
  clock: Clock | null;
  feed: StationFeed | null;
  linkTimeoutS: number;
  /** Start every channel afresh instead of resuming unfinished runs. */
  fresh: boolean;
  print(line: string): void;
}

interface Rig {
  plan: RigPlan;
  link: SharedRigLink;
  open: boolean;
  helloSeen: boolean;
}

interface Slot {
  key: string;
  rig: Rig;
  plan: ChannelPlan;
  cellId: string | null;
  run: ChannelRun | null;
  starting: boolean;
  last: ChannelOutcome | null;
}

/**
 * A station: its rigs, each on one shared link, and its channels, each an independent run.
 * What belongs to a rig (the port, the heartbeat, hello) is handled once here and in the
 * shared link; a channel's end touches only that channel; a rig that goes away switches off
 * and ends (or, if it returns in time, resumes) only its own channels. Channels are started,
 * stopped, re-cut and marked one by one while the others run, and a channel whose run has
 * ended takes the next run (a new cell) without the daemon restarting.
 */
export class Station {
  private readonly rigs: Rig[] = [];
  private readonly slots = new Map<string, Slot>();
  private readonly index: RunIndex;
  private readonly timers = new StationTimers();
  private readonly idleWaiters: Array<() => void> = [];
  private stopping = false;

  constructor(private readonly o: StationOptions) {
    this.index = RunIndex.for(o.runs, o.name);
    for (const plan of o.plan.rigs) {
      const rig: Rig = { plan, link: this.linkFor(plan), open: false, helloSeen: false };
      this.rigs.push(rig);
      for (const c of plan.channels) {
        const key = channelKey(plan.name, c.channel);
        this.slots.set(key, {
          key,
          rig,
          plan: c,
          cellId: c.cellId,
          run: null,
          starting: false,
          last: null,
        });
        o.feed?.add(plan.name, c.channel, c.cellId);
      }
    }
    o.feed?.onControl((key, c, by) => this.control(key, c, by ?? 'live control'));
  }

  /** Channel keys in rig and channel order. */
  keys(): string[] {
    return [...this.slots.keys()];
  }

  /**
   * Opens every rig and starts every channel. After a crash, a channel whose run never
   * finished is resumed from its folder, and one whose run had ended waits for a start (its
   * cell is discharged); `fresh` starts them all anew. A rig whose port cannot be opened is
   * reported and its channels wait; the others run.
   */
  async start(): Promise<void> {
    await this.index.load();
    await Promise.all(this.rigs.map((r) => this.openRig(r)));
    if (this.rigs.every((r) => !r.open)) throw new Error('no rig of the station could be opened');
    for (const slot of this.slots.values()) {
      if (!slot.rig.open) continue;
      const last = this.o.fresh ? null : await this.index.last(slot.key);
      if (last && !last.unfinished) {
        this.o.print(
          `${slot.key}: its last run has ended (${last.folder}); after a cell swap: cellvigil control ${slot.key} start`,
        );
        continue;
      }
      await this.launch(slot, last?.folder ?? null).catch((e: Error) =>
        this.o.print(`${slot.key}: not started: ${e.message}`),
      );
    }
  }

  /** Starts the next run on a channel (a fresh cell), optionally naming the cell. */
  async startChannel(key: string, cellId: string | null, by: string): Promise<ControlReply> {
    const slot = this.slots.get(key);
    if (!slot) return { ok: false, error: `there is no channel ${key}` };
    if (this.stopping) return { ok: false, error: 'the station is stopping' };
    if (slot.run || slot.starting) return { ok: false, error: `${key} is running; stop it first` };
    if (!slot.rig.open) await this.openRig(slot.rig);
    if (!slot.rig.open) return { ok: false, error: `rig ${slot.rig.plan.name} is not connected` };
    if (cellId !== null) slot.cellId = cellId;
    this.o.print(`${key}: started by ${by}${cellId !== null ? ` (cell ${cellId})` : ''}`);
    try {
      await this.launch(slot, null);
      return { ok: true };
    } catch (e) {
      return { ok: false, error: (e as Error).message };
    }
  }

  /** A viewer's or the command line's request for one channel. */
  control(key: string, c: StationControlRequest, by: string): ControlReply {
    const slot = this.slots.get(key);
    if (!slot) return { ok: false, error: `there is no channel ${key}` };
    if (c.type === 'start') {
      if (slot.run || slot.starting)
        return { ok: false, error: `${key} is running; stop it first` };
      if (this.stopping) return { ok: false, error: 'the station is stopping' };
      // The run starts (or is refused at its precheck) in its own time; a failure is printed.
      void this.startChannel(key, c.cell_id ?? null, by).then((r) => {
        if (!r.ok) this.o.print(`${key}: not started: ${r.error}`);
      });
      return { ok: true };
    }
    const run = slot.run;
    if (!run) return { ok: false, error: `${key} has no run going` };
    switch (c.type) {
      case 'stop':
        run.stop(by);
        return { ok: true };
      case 'set-cutoff':
        // The feed speaks for the whole string; the run takes volts per cell.
        return run.setCutoffPerCell(c.cutoff_V / (slot.plan.cells ?? 1), by);
      case 'mark':
        return run.mark(c.note, by);
    }
  }

  /** Stops every running channel and waits for their results. */
  async stopAll(by: string): Promise<void> {
    this.stopping = true;
    const going = [...this.slots.values()].flatMap((s) => (s.run ? [s.run] : []));
    for (const r of going) r.stop(by);
    await Promise.all(going.map((r) => r.done.catch(() => undefined)));
    await this.whenIdle();
  }

  /** Resolves when no channel has a run going or starting. */
  whenIdle(): Promise<void> {
    if (this.isIdle()) return Promise.resolve();
    return new Promise((resolve) => this.idleWaiters.push(resolve));
  }

  /** How each channel's last run ended (null for a channel that has not ended one). */
  outcomes(): Map<string, ChannelOutcome | null> {
    return new Map([...this.slots].map(([k, s]) => [k, s.last]));
  }

  /** Closes every rig's port. */
  async close(): Promise<void> {
    await Promise.all(this.rigs.map((r) => r.link.close().catch(() => undefined)));
  }

  private isIdle(): boolean {
    return [...this.slots.values()].every((s) => !s.run && !s.starting);
  }

  private async openRig(rig: Rig): Promise<void> {
    try {
      await rig.link.open();
      rig.open = true;
      this.o.print(`rig ${rig.plan.name}: ${rig.link.description}`);
    } catch (e) {
      this.o.print(`rig ${rig.plan.name}: ${(e as Error).message}`);
    }
  }

  private async launch(slot: Slot, resume: string | null): Promise<void> {
    slot.starting = true;
    try {
      if (slot.cellId !== null) this.o.feed?.setCellId(slot.key, slot.cellId);
      const run = await this.o.runner({
        rig: slot.rig.plan,
        plan: slot.plan,
        source: slot.rig.link.channel(slot.plan.channel),
        clock: this.o.clock,
        runs: this.o.runs,
        resume,
        cellId: slot.cellId,
        hub: this.o.feed?.hub(slot.key) ?? null,
        linkTimeoutS: slot.rig.plan.linkTimeoutS ?? this.o.linkTimeoutS,
        timers: this.timers,
      });
      slot.run = run;
      await this.index
        .set(slot.key, run.folder)
        .catch((e: Error) => this.o.print(`station index not written: ${e.message}`));
      void run.done.then(
        (outcome) => this.ended(slot, run, outcome),
        (e: Error) => this.ended(slot, run, null, e),
      );
    } finally {
      slot.starting = false;
      if (!slot.run) this.wakeIdle();
    }
  }

  private ended(slot: Slot, run: ChannelRun, outcome: ChannelOutcome | null, e?: Error): void {
    if (slot.run === run) slot.run = null;
    slot.last = outcome;
    const how = outcome ? String(outcome.result['end_reason']) : `failed: ${e?.message ?? ''}`;
    this.o.print(`${slot.key}: ended: ${how} (${run.folder})`);
    this.wakeIdle();
  }

  private wakeIdle(): void {
    if (!this.isIdle()) return;
    for (const w of this.idleWaiters.splice(0)) w();
  }

  private linkFor(plan: RigPlan): SharedRigLink {
    let rig: Rig | undefined;
    const link = new SharedRigLink(
      this.o.makeSource(plan),
      {
        line: (text) => {
          rig ??= this.rigs.find((r) => r.plan === plan);
          if (!text.startsWith('H,') || !rig || rig.helloSeen) return;
          const d = decodeRigLine(text);
          if (!d.ok || d.message.kind !== 'hello') return;
          rig.helloSeen = true;
          const m = d.message;
          this.o.print(
            `rig ${plan.name}: ${m.rigId}, firmware ${m.firmware}, ${m.adcBits}-bit ADC, ${m.channels} channel(s)`,
          );
          const beyond = plan.channels.filter((c) => c.channel >= m.channels).map((c) => c.channel);
          if (beyond.length > 0)
            this.o.print(
              `rig ${plan.name}: warning: the rig reports ${m.channels} channel(s), the station file uses ${beyond.join(', ')}`,
            );
        },
        overlong: () => undefined,
        closed: (reason) =>
          this.o.print(
            `rig ${plan.name}: the port went away (${reason}); its channels switch their loads off and wait for it`,
          ),
        reopened: () => this.o.print(`rig ${plan.name}: back`),
      },
      {
        // Heartbeats are timed on the clock the rig runs on (a simulated station's virtual one).
        ...(this.o.clock ? { now: () => this.o.clock!.now() } : {}),
      },
    );
    return link;
  }
}
