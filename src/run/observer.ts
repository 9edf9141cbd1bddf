import type { EventRecord } from '../record/events.js';
import type { RunResult } from '../record/result.js';
import type { EndReason } from '../session/session-types.js';
import type { SampleRow } from '../sinks/sample-row.js';

/** Anything that follows a run live (the status line, the live feed). */
export interface RunObserver {
  sample?(row: SampleRow, loadOn: boolean): void;
  event?(rec: EventRecord): void;
  /** A safety limit tripped: the load is being switched off for `reason`. */
  limitTripped?(hostS: number, reason: EndReason, why: string): void;
  ended?(result: RunResult): void;
}
