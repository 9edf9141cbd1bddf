import { LogFile } from '../sinks/log-file.js';

/** Rejected lines logged one by one per minute before they are only counted (hostile input cannot fill the disk). */
export const REJECTED_PER_MINUTE = 50;

export interface EventRecord {
  host_s: number;
  wall_time: string;
  event: string;
  [key: string]: unknown;
}

/** events.jsonl: one JSON object a line, flushed with the sample log. */
export class EventLog {
  private readonly file: LogFile;
  private minuteStart = -Infinity;
  private rejectedThisMinute = 0;
  private suppressed: Record<string, number> = {};

  constructor(dir: string) {
    this.file = new LogFile({ dir, name: 'events.jsonl' });
  }

  write(
    hostS: number,
    wallMs: number,
    event: string,
    detail: Record<string, unknown> = {},
  ): EventRecord {
    const rec: EventRecord = {
      host_s: round3(hostS),
      wall_time: new Date(wallMs).toISOString(),
      event,
      ...detail,
    };
    this.file.append(JSON.stringify(rec));
    return rec;
  }

  /** A rejected line: logged while under the per-minute budget, else counted for the summary. */
  rejected(hostS: number, wallMs: number, reason: string, detail: string, line: string): void {
    this.rollMinute(hostS, wallMs);
    if (this.rejectedThisMinute < REJECTED_PER_MINUTE) {
      this.rejectedThisMinute++;
      // Only printable ASCII of the line, shortened: the log must stay valid, readable text.
      const shown = line.replace(/[^\x20-\x7e]/g, '?').slice(0, 120);
      this.write(hostS, wallMs, 'frame_rejected', { reason, detail, line: shown });
    } else {
      this.suppressed[reason] = (this.suppressed[reason] ?? 0) + 1;
    }
  }

  private rollMinute(hostS: number, wallMs: number): void {
    if (hostS - this.minuteStart < 60) return;
    this.summarise(hostS, wallMs);
    this.minuteStart = hostS;
    this.rejectedThisMinute = 0;
  }

  /** Writes the count of rejected lines not logged one by one, if any. */
  summarise(hostS: number, wallMs: number): void {
    if (Object.keys(this.suppressed).length === 0) return;
    this.write(hostS, wallMs, 'rejected_summary', { not_logged_by_reason: this.suppressed });
    this.suppressed = {};
  }

  flush(): Promise<void> {
    return this.file.flush();
  }

  close(): Promise<void> {
    return this.file.close();
  }
}

function round3(x: number): number {
  return Math.round(x * 1000) / 1000;
}
