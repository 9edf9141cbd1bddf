/**
 * A program's 1.1 commands, one at a time: each waits for its `A` line before the next goes
 * out, is sent again when none came in time, and after its last try is a fault. Pure: times in,
 * commands to send out.
 */
import { MODE_LETTER, type HostCommand11 } from '../protocol/messages.js';

/** The arguments the rig's acknowledgement carries for `cmd`. */
function ackArgs(cmd: HostCommand11): string[] {
  const value = cmd.command === 'MODE' ? MODE_LETTER[cmd.mode] : String(cmd.raw);
  return [String(cmd.channel), value];
}

export class CommandQueue {
  private readonly queue: HostCommand11[] = [];
  private sentAtMs = -Infinity;
  private tries = 0;

  /**
   * @param confirmMs how long an acknowledgement may take before the command is sent again.
   * @param maxTries sends of one command before it is a fault.
   */
  constructor(
    private readonly confirmMs: number,
    private readonly maxTries = 3,
  ) {}

  get waiting(): number {
    return this.queue.length;
  }

  /** Queues commands; returns the one to send now, if the queue was idle. */
  push(cmds: readonly HostCommand11[], nowMs: number): HostCommand11[] {
    const idle = this.queue.length === 0;
    this.queue.push(...cmds);
    return idle ? this.sendHead(nowMs, true) : [];
  }

  /** Drops everything queued (a stop replaces it). */
  clear(): void {
    this.queue.length = 0;
  }

  /** An `A` line: when it acknowledges the command in flight, the next goes out. */
  ack(command: string, args: readonly string[], nowMs: number): HostCommand11[] {
    const head = this.queue[0];
    if (head === undefined || head.command !== command) return [];
    const want = ackArgs(head);
    if (args.length !== want.length || args.some((a, i) => a !== want[i])) return [];
    this.queue.shift();
    return this.sendHead(nowMs, true);
  }

  /** The command to send again, or the one that was never acknowledged (a fault). */
  tick(nowMs: number): { resend: HostCommand11[]; failed: HostCommand11 | null } {
    const head = this.queue[0];
    if (head === undefined || nowMs - this.sentAtMs < this.confirmMs)
      return { resend: [], failed: null };
    if (this.tries >= this.maxTries) return { resend: [], failed: head };
    return { resend: this.sendHead(nowMs, false), failed: null };
  }

  private sendHead(nowMs: number, fresh: boolean): HostCommand11[] {
    const head = this.queue[0];
    if (head === undefined) return [];
    this.tries = fresh ? 1 : this.tries + 1;
    this.sentAtMs = nowMs;
    return [head];
  }
}
