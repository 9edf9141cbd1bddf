/**
 * What the report needs from events.jsonl, gathered in one pass in bounded memory: counts by
 * name, the events worth listing (up to a limit), how the run ended, where it was resumed, and
 * the rejected-line count.
 */
import type { EventRecord } from '../run/event-log.js';
import { SAFETY_END_REASONS } from '../session/session-types.js';

/** Events that call for attention in the report. */
const ALARMS = new Set([
  'clock_warning',
  'frames_lost',
  'gap',
  'rig_restart',
  'rig_error',
  'load_off_unconfirmed',
  'link_closed',
  'cutoff_refused',
  'load_found_on',
  'frame_rejected',
  'rejected_summary',
  'signal',
  'unlogged_discharge',
  'calibration_rejected',
  'implausible_reading',
  'implausible_summary',
  'open_load',
]);
const SAFETY_ENDS = new Set<string>(SAFETY_END_REASONS);

export interface ListedEvent {
  hostS: number;
  name: string;
  alarm: boolean;
  /** The event's other fields, as compact text. */
  detail: string;
}

/** Where the daemon resumed an interrupted run, and the charge it estimated for the time nobody logged. */
export interface Resumption {
  atS: number;
  /** Seconds of load-on time the daemon estimated while nothing was logging (0 when the load was found off). */
  unloggedS: number;
}

export interface RunEnd {
  reason: string;
  detail: string;
  loadOffConfirmed: boolean;
}

export interface EventDigestResult {
  counts: Record<string, number>;
  listed: ListedEvent[];
  /** Events not listed because the list was full (they are still counted). */
  unlisted: number;
  end: RunEnd | null;
  /** Each `resumed` event, with its `unlogged_discharge` estimate. */
  resumptions: Resumption[];
  /** Lines rejected, logged one by one plus those only summarised. */
  rejectedLines: number;
  /** Every `cutoff_changed`, in order. */
  cutoffChanges: Array<{ hostS: number; cutoffV: number }>;
}

/** Rejected lines listed one by one before they are only counted. */
const REJECTED_LISTED = 20;

export class EventDigest {
  private readonly r: EventDigestResult = {
    counts: {},
    listed: [],
    unlisted: 0,
    end: null,
    resumptions: [],
    rejectedLines: 0,
    cutoffChanges: [],
  };

  constructor(private readonly maxListed = 400) {}

  add(e: EventRecord): void {
    const r = this.r;
    const { host_s: hostS, wall_time: _wall, event: name, ...rest } = e;
    r.counts[name] = (r.counts[name] ?? 0) + 1;
    if (name === 'resumed') r.resumptions.push({ atS: hostS, unloggedS: 0 });
    const resumption = r.resumptions.at(-1);
    if (name === 'unlogged_discharge' && resumption && typeof rest['estimated_s'] === 'number')
      resumption.unloggedS = rest['estimated_s'];
    if (name === 'run_ended') {
      r.end = {
        reason: String(rest['end_reason'] ?? 'stopped'),
        detail: String(rest['detail'] ?? ''),
        loadOffConfirmed: rest['load_off_confirmed'] !== false,
      };
    }
    if (name === 'cutoff_changed' && typeof rest['cutoff_V'] === 'number')
      r.cutoffChanges.push({ hostS, cutoffV: rest['cutoff_V'] });
    if (name === 'frame_rejected') r.rejectedLines++;
    if (name === 'rejected_summary') {
      const by = rest['not_logged_by_reason'];
      if (by && typeof by === 'object')
        for (const v of Object.values(by)) r.rejectedLines += typeof v === 'number' ? v : 0;
    }
    // Commands repeat what the state changes say; the cautions have their own section.
    const quiet =
      (name === 'frame_rejected' && r.counts[name]! > REJECTED_LISTED) ||
      name === 'command' ||
      name === 'cautions';
    if (quiet || r.listed.length >= this.maxListed) {
      r.unlisted++;
      return;
    }
    const alarm =
      ALARMS.has(name) || (name === 'run_ended' && SAFETY_ENDS.has(String(rest['end_reason'])));
    r.listed.push({ hostS, name, alarm, detail: compact(rest) });
  }

  result(): EventDigestResult {
    return this.r;
  }
}

/** Numbers to 6 significant digits: a log keeps full precision, a table needs none of it. */
function shorten(v: unknown): string {
  if (typeof v === 'string') return v;
  return JSON.stringify(v, (_k, x: unknown) =>
    typeof x === 'number' && !Number.isInteger(x) ? Number(x.toPrecision(6)) : x,
  );
}

function compact(rest: Record<string, unknown>): string {
  const parts = Object.entries(rest).map(([k, v]) => `${k}: ${shorten(v)}`);
  const s = parts.join('; ');
  return s.length > 300 ? `${s.slice(0, 297)}…` : s;
}
