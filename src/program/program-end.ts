/**
 * The run's end reason for the way a program finished: every step done; a charge that never
 * ended (its timeout); a step's safety end (a charge's over-voltage, a temperature outside the
 * charge window or unknown, a mode the rig never took) as `charge_fault` naming the segment's
 * end; over-temperature and a stop as in any run.
 */
import type { EndReason } from '../session/session-types.js';
import type { SegmentEnd } from './sequence-types.js';

export function endOfProgram(
  finished: { aborted: boolean; reason: SegmentEnd | 'complete' },
  last: { index: number; kind: string; step: string } | null,
): { reason: EndReason; detail: string } {
  const where = last ? `segment ${last.index} (${last.kind}, ${last.step})` : 'the program';
  const r = finished.reason;
  if (!finished.aborted || r === 'complete')
    return { reason: 'program_complete', detail: 'every step of the program ran' };
  switch (r) {
    case 'charge_timeout':
      return { reason: 'charge_timeout', detail: `${where} did not end before its timeout` };
    case 'over_temperature':
      return {
        reason: 'over_temperature',
        detail: `the cell went past its temperature limit in ${where}`,
      };
    case 'stopped':
      return { reason: 'stopped', detail: `stopped in ${where}` };
    default:
      return { reason: 'charge_fault', detail: `${r}: ${where}` };
  }
}
