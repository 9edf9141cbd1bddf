/**
 * What the report needs from events.jsonl, gathered in one pass in bounded memory: counts by
 * name, the events worth listing (up to a limit), how the run ended, where it was resumed, and
 * the rejected-line count.
 */
import type { LoggedEvent } from '../record/event-log.js';
import { flaggedInReport } from '../record/events.js';

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

  add(e: LoggedEvent): void {
    const r = this.r;
    const name = e.event === 'foreign' ? e.name : e.event;
    r.counts[name] = (r.counts[name] ?? 0) + 1;
    this.follow(e);
    // Commands repeat what the state changes say; the cautions have their own section.
    const quiet =
      (name === 'frame_rejected' && r.counts[name]! > REJECTED_LISTED) ||
      name === 'command' ||
      name === 'cautions';
    if (quiet || r.listed.length >= this.maxListed) {
      r.unlisted++;
      return;
    }
    const { host_s: hostS, wall_time: _wall, event: _event, ...rest } = e;
    const fields = e.event === 'foreign' ? e.fields : rest;
    r.listed.push({ hostS, name, alarm: flaggedInReport(e), detail: compact(fields) });
  }

  /** The events whose fields the report uses. */
  private follow(e: LoggedEvent): void {
    const r = this.r;
    switch (e.event) {
      case 'resumed':
        r.resumptions.push({ atS: e.host_s, unloggedS: 0 });
        break;
      case 'unlogged_discharge': {
        const resumption = r.resumptions.at(-1);
        if (resumption) resumption.unloggedS = e.estimated_s;
        break;
      }
      case 'run_ended':
        r.end = {
          reason: e.end_reason,
          detail: e.detail,
          loadOffConfirmed: e.load_off_confirmed,
        };
        break;
      case 'cutoff_changed':
        r.cutoffChanges.push({ hostS: e.host_s, cutoffV: e.cutoff_V });
        break;
      case 'frame_rejected':
        r.rejectedLines++;
        break;
      case 'rejected_summary':
        for (const v of Object.values(e.not_logged_by_reason)) r.rejectedLines += v;
        break;
      default:
        break;
    }
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

function compact(rest: object): string {
  const parts = Object.entries(rest).map(([k, v]) => `${k}: ${shorten(v)}`);
  const s = parts.join('; ');
  return s.length > 300 ? `${s.slice(0, 297)}…` : s;
}
