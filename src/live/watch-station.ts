import type { ServerMessage, StationChannel, StationMessage } from './live-types.js';
import { clockText } from './watch-view.js';

/** What `watch` shows of a station, folded from the feed. Pure. */
export interface StationView {
  channels: StationChannel[];
  link: string;
}

/** End reasons in a word or two, so a state column of 11 characters holds them. */
const SHORT_END: Record<string, string> = {
  cutoff: 'cutoff',
  over_temperature: 'over-temp',
  stopped: 'stopped',
  link_lost: 'link lost',
  fault: 'fault',
  refused: 'refused',
  implausible_reading: 'implausible',
  open_load: 'open load',
  interrupted: 'interrupted',
};

/** Columns: name, width, right-aligned. 79 characters in all, so 80 columns never wrap. */
const COLUMNS = [
  ['CHANNEL', 10, false],
  ['CELL', 10, false],
  ['STATE', 11, false],
  ['V', 6, true],
  ['A', 6, true],
  ['mAh', 5, true],
  ['°C', 5, true],
  ['TO CUT', 6, true],
  ['ALARM', 12, false],
] as const;

export const STATION_TABLE_WIDTH = COLUMNS.reduce((w, c) => w + c[1], 0) + COLUMNS.length - 1;

/** Folds a message in; true when the table should be redrawn or an event line printed. */
export function applyStationMessage(view: StationView, m: ServerMessage): boolean {
  if (m.type === 'station') {
    view.channels = m.channels;
    return true;
  }
  return m.type === 'state' || m.type === 'alarm' || m.type === 'result';
}

function cell(text: string, width: number, right: boolean): string {
  const t = text.length > width ? `${text.slice(0, width - 1)}…` : text;
  return right ? t.padStart(width) : t.padEnd(width);
}

function num(x: number | null | undefined, digits: number): string {
  return typeof x === 'number' && Number.isFinite(x) ? x.toFixed(digits) : '–';
}

function row(c: StationChannel): string[] {
  const s = c.status.sample;
  const end = c.result?.end_reason;
  const state =
    typeof end === 'string'
      ? (SHORT_END[end] ?? end)
      : c.run
        ? c.status.state || 'waiting'
        : 'idle';
  const capacity = c.result?.capacity_Ah;
  const charge = typeof capacity === 'number' ? capacity : s?.charge_Ah;
  const ttc = c.result || !c.run ? '' : clockText(c.status.time_to_cutoff_s).replace(/^–$/, '');
  return [
    c.channel,
    c.cell_id ?? '',
    state,
    num(s?.voltage_V, 3),
    num(s?.current_A, 3),
    typeof charge === 'number' ? (charge * 1000).toFixed(0) : '–',
    num(s?.temperature_C, 1),
    ttc,
    c.alarm ? c.alarm.kind : '',
  ];
}

function line(fields: readonly string[]): string {
  return COLUMNS.map(([, w, right], i) => cell(fields[i] ?? '', w, right))
    .join(' ')
    .trimEnd();
}

/** The station as a table that fits 80 columns: a header, a line per channel, the link state. */
export function stationTable(v: StationView): string[] {
  const running = v.channels.filter((c) => c.run && !c.result).length;
  return [
    `station: ${v.channels.length} channels, ${running} running  [${v.link}]`.slice(0, 79),
    line(COLUMNS.map((c) => c[0])),
    ...v.channels.map((c) => line(row(c))),
  ];
}

/** A line for a pipe or log: one channel's state change, alarm or result. */
export function stationEventLine(m: StationMessage | ServerMessage): string | null {
  const who = 'channel' in m && m.channel !== undefined ? m.channel : '?';
  switch (m.type) {
    case 'state':
      return `${who} ${m.from} -> ${m.to} (${m.why})`;
    case 'alarm':
      return `${who} ! ${m.kind}: ${m.detail}`;
    case 'result': {
      const cap = m.result.capacity_Ah;
      return `${who} ended: ${String(m.result.end_reason)}${typeof cap === 'number' ? `, ${(cap * 1000).toFixed(0)} mAh` : ''}`;
    }
    default:
      return null;
  }
}
