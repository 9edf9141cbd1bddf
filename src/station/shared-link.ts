import type { Source, SourceHandlers } from '../sources/source.js';
import { lineChannel, RIG_LINE } from './line-route.js';

/** What the rig as a whole says: hello, rig errors, lines no channel can claim, the link's fate. */
export interface RigHandlers {
  line(text: string): void;
  overlong(length: number): void;
  closed(reason: string): void;
  reopened(): void;
}

export interface SharedLinkOptions {
  /**
   * The rig hears at most one heartbeat per this many ms however many channels send one: every
   * channel's session beats while its load may be on, and the rig's watchdog is one for all.
   * Below the sessions' own period, so the beats of one channel alone still all go through.
   * @default 400
   */
  beatGapMs?: number;
  /** The clock the gap is measured on. @default performance.now */
  now?: () => number;
}

const BEAT_PREFIX = 'C,BEAT|';

/**
 * One rig's link shared by its channels. The station opens the link once; each channel's run
 * gets a `Source` of its own that sees its channel's frames and acknowledgements, the rig's
 * hello and errors, and every link-lost and reopened notice (each channel switches its load
 * off and ends or resumes by itself). A channel that finishes closes only its view; the link
 * stays up for the others.
 */
export class SharedRigLink {
  private readonly channels = new Map<number, SourceHandlers>();
  private readonly beatGapMs: number;
  private readonly now: () => number;
  private lastBeatAt = -Infinity;
  private opened = false;
  private up = false;

  constructor(
    private readonly source: Source,
    private readonly rig: RigHandlers,
    o: SharedLinkOptions = {},
  ) {
    this.beatGapMs = o.beatGapMs ?? 400;
    this.now = o.now ?? (() => performance.now());
  }

  get description(): string {
    return this.source.description;
  }

  /** True while the port is open (false after it went away, until it is back). */
  get isUp(): boolean {
    return this.up;
  }

  /** Opens the rig's port (again, after a failed try); lines for channels without a view are dropped. */
  async open(): Promise<void> {
    if (this.opened) return;
    await this.source.open({
      line: (text) => this.route(text),
      overlong: (n) => this.rig.overlong(n),
      closed: (reason) => {
        this.up = false;
        this.rig.closed(reason);
        for (const h of [...this.channels.values()]) h.closed(reason);
      },
      reopened: () => {
        this.up = true;
        this.rig.reopened();
        for (const h of [...this.channels.values()]) h.reopened?.();
      },
    });
    this.opened = true;
    this.up = true;
  }

  /** A channel's own view of the link, as a Source its run can open and close. */
  channel(ch: number): Source {
    return {
      kind: this.source.kind,
      description: `${this.source.description}, channel ${ch}`,
      open: async (handlers: SourceHandlers): Promise<void> => {
        if (this.channels.has(ch))
          throw new Error(`channel ${ch} of ${this.description} is open already`);
        await this.open();
        this.channels.set(ch, handlers);
      },
      write: (line) => this.write(line),
      close: async (): Promise<void> => {
        this.channels.delete(ch);
      },
    };
  }

  /** Closes the port for good (the station is stopping). */
  async close(): Promise<void> {
    this.channels.clear();
    this.up = false;
    await this.source.close();
  }

  private route(text: string): void {
    const ch = lineChannel(text);
    if (ch === RIG_LINE) {
      this.rig.line(text);
      // Hello and rig errors concern every channel's run as well (its event log keeps them);
      // noise that names no channel is the rig's alone, not a rejected frame of every channel.
      if (text.startsWith('H,') || text.startsWith('E,'))
        for (const h of this.channels.values()) h.line(text);
      return;
    }
    this.channels.get(ch)?.line(text);
  }

  private write(line: string): boolean {
    if (line.startsWith(BEAT_PREFIX)) {
      const t = this.now();
      if (t - this.lastBeatAt < this.beatGapMs) return true;
      this.lastBeatAt = t;
    }
    return this.source.write(line);
  }
}
