/**
 * The report's event list, readable at a glance: events that come in swarms (lost frames,
 * rejected lines, gaps) are summed per minute into one row, and every row has one of three
 * levels, each with its own look: alarm (a limit, a load not confirmed off), warning (data lost
 * or doubted, the rig complaining), note (nothing about the figures changes).
 */
import type { ListedEvent } from './event-digest.js';
import { esc, hms } from './html-text.js';

export type EventLevel = 'alarm' | 'warning' | 'note';

/** Events summed per minute rather than listed one by one. */
const SWARMS = new Set(['frames_lost', 'frame_rejected', 'rejected_summary', 'gap']);
const ALARM_EVENTS = new Set(['load_off_unconfirmed', 'load_found_on']);
const WARNING_EVENTS = new Set([
  'frames_lost',
  'frame_rejected',
  'rejected_summary',
  'gap',
  'rig_restart',
  'rig_error',
  'link_closed',
  'cutoff_refused',
  'unlogged_discharge',
  'calibration_rejected',
]);

export interface EventRow {
  fromS: number;
  toS: number;
  name: string;
  level: EventLevel;
  /** Events the row stands for. */
  events: number;
  detail: string;
}

export function levelOf(e: ListedEvent): EventLevel {
  if (ALARM_EVENTS.has(e.name) || (e.name === 'run_ended' && e.alarm)) return 'alarm';
  return WARNING_EVENTS.has(e.name) ? 'warning' : 'note';
}

/** Frames a `frames_lost` event stands for (its count), else 1. */
function framesOf(e: ListedEvent): number {
  const m = /(?:^|; )count: (\d+)/.exec(e.detail);
  return m ? Number(m[1]) : 1;
}

/** The listed events as rows: swarms summed per minute of run time, the rest one row each. */
export function eventRows(listed: readonly ListedEvent[]): EventRow[] {
  const rows: EventRow[] = [];
  const open = new Map<string, { row: EventRow; frames: number }>();
  for (const e of listed) {
    if (!SWARMS.has(e.name)) {
      rows.push({
        fromS: e.hostS,
        toS: e.hostS,
        name: e.name,
        level: levelOf(e),
        events: 1,
        detail: e.detail,
      });
      continue;
    }
    const minute = Math.floor(e.hostS / 60);
    const key = `${e.name}@${minute}`;
    const o = open.get(key);
    if (o) {
      o.row.events++;
      o.row.toS = e.hostS;
      o.frames += framesOf(e);
      o.row.detail = summary(e.name, o.row.events, o.frames);
      continue;
    }
    const row: EventRow = {
      fromS: e.hostS,
      toS: e.hostS,
      name: e.name,
      level: levelOf(e),
      events: 1,
      detail: e.detail,
    };
    open.set(key, { row, frames: framesOf(e) });
    rows.push(row);
  }
  return rows;
}

function summary(name: string, events: number, frames: number): string {
  if (name === 'frames_lost') return `${frames} frames lost in ${events} gaps of the sequence`;
  if (name === 'frame_rejected') return `${events} lines rejected`;
  if (name === 'gap') return `${events} gaps of more than 2 s`;
  return `${events} summaries`;
}

const LEVEL_WORD: Record<EventLevel, string> = { alarm: 'alarm', warning: 'warning', note: 'note' };

export function eventRowHtml(r: EventRow): string {
  const when = r.toS > r.fromS ? `${hms(r.fromS)}–${hms(r.toS)}` : hms(r.fromS);
  const name = r.events > 1 ? `${r.name} ×${r.events}` : r.name;
  return `<tr class="ev-${r.level}" data-level="${r.level}"><td class="num">${when}</td><td>${LEVEL_WORD[r.level]}</td><td>${esc(name)}</td><td class="small">${esc(r.detail)}</td></tr>`;
}
