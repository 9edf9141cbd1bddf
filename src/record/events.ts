/**
 * Every kind of event in events.jsonl, defined once: its fields (which give both the TypeScript
 * type and the schema a reader checks), and how much attention it calls for. The daemon writes
 * these, the live link turns the alarms into live messages, the report digest lists them.
 */
import { SAFETY_END_REASONS, type SessionEnd } from '../session/session-types.js';

/** Field types, as the schema of each event kind states them; a trailing `?` marks an optional field. */
type FieldSpec =
  | 'string'
  | 'number'
  | 'integer'
  | 'boolean'
  | 'strings'
  | 'counts'
  | 'number|null'
  | 'string|null'
  | `${'string' | 'number' | 'integer' | 'boolean' | 'strings' | 'number|null' | 'string|null'}?`;

/**
 * `alarm`: shown to live viewers and flagged in the report. `notice`: flagged in the report only
 * (frame-level trouble, too frequent for a viewer's alarm list). `info`: listed, not flagged.
 */
export type Attention = 'alarm' | 'notice' | 'info';

interface KindSpec {
  attention: Attention;
  fields: Readonly<Record<string, FieldSpec>>;
}

const NOTE = { note: 'string' } as const;
const FILE_ERROR = { file: 'string', error: 'string' } as const;

export const EVENT_KINDS = {
  // The run's own course.
  run_started: {
    attention: 'info',
    fields: {
      source: 'string',
      chemistry: 'string',
      cells: 'integer',
      cutoff_V: 'number',
      version: 'string',
    },
  },
  resumed: {
    attention: 'info',
    fields: {
      rows: 'integer',
      charge_Ah: 'number',
      energy_Wh: 'number',
      down_s: 'number',
      cut_bytes: 'integer',
      source: 'string',
    },
  },
  cautions: { attention: 'info', fields: { lines: 'strings' } },
  calibration: {
    attention: 'info',
    fields: { id: 'string', file: 'string|null?', date: 'string?', note: 'string?' },
  },
  run_ended: {
    attention: 'info',
    fields: { end_reason: 'string', detail: 'string', load_off_confirmed: 'boolean' },
  },
  // Frames and the rig.
  command: { attention: 'info', fields: { line: 'string', queued: 'boolean' } },
  frames_lost: {
    attention: 'notice',
    fields: { count: 'integer', seq: 'integer', note: 'string?' },
  },
  gap: { attention: 'notice', fields: { seq: 'integer', ...NOTE } },
  rig_restart: { attention: 'notice', fields: { seq: 'integer', tick_ms: 'integer' } },
  frame_rejected: {
    attention: 'notice',
    fields: { reason: 'string', detail: 'string', line: 'string' },
  },
  rejected_summary: { attention: 'notice', fields: { not_logged_by_reason: 'counts' } },
  rig_lines_summary: { attention: 'notice', fields: { not_logged_by_kind: 'counts' } },
  rig_ack: { attention: 'info', fields: { command: 'string', args: 'strings' } },
  rig_hello: {
    attention: 'info',
    fields: { rig_id: 'string', firmware: 'string', adc_bits: 'integer', channels: 'integer' },
  },
  rig_error: { attention: 'alarm', fields: { code: 'string', text: 'string' } },
  clock_warning: { attention: 'alarm', fields: { rig_clock_error_ppm: 'number' } },
  link_closed: { attention: 'notice', fields: { reason: 'string' } },
  unlogged_discharge: {
    attention: 'alarm',
    fields: { estimated_s: 'number', charge_Ah: 'number', basis: 'string' },
  },
  // The session's state machine.
  state: { attention: 'info', fields: { from: 'string', to: 'string', why: 'string' } },
  link_down: { attention: 'alarm', fields: { state: 'string', waiting_s: 'number' } },
  link_up: { attention: 'info', fields: { down_s: 'number' } },
  load_found_on: { attention: 'notice', fields: { action: 'string' } },
  precheck_passed: {
    attention: 'info',
    fields: { rest_V: 'number', temperature_C: 'number|null' },
  },
  schedule_switch: { attention: 'info', fields: { load_on: 'boolean' } },
  load_still_on: { attention: 'info', fields: NOTE },
  load_on: {
    attention: 'info',
    fields: {
      open_circuit_V: 'number|null',
      loaded_V: 'number',
      current_A: 'number',
      dc_resistance_ohm: 'number|null',
    },
  },
  load_off_unconfirmed: { attention: 'alarm', fields: NOTE },
  // A program run's steps (segments.jsonl keeps each ended one in full).
  segment_started: {
    attention: 'info',
    fields: { index: 'integer', kind: 'string', step: 'string', cycle: 'number|null' },
  },
  segment_ended: {
    attention: 'info',
    fields: {
      index: 'integer',
      end_reason: 'string',
      charge_Ah: 'number',
      energy_Wh: 'number',
      duration_s: 'number',
    },
  },
  implausible_reading: {
    attention: 'alarm',
    fields: {
      volts: 'number|null',
      amps: 'number|null',
      why: 'string',
      count: 'integer',
      note: 'string',
    },
  },
  implausible_summary: {
    attention: 'notice',
    fields: { since_last: 'integer', count: 'integer', last_why: 'string' },
  },
  open_load: {
    attention: 'alarm',
    fields: { amps: 'number', no_current_A: 'number', band_A: 'number', note: 'string' },
  },
  // The user and the files beside the run.
  signal: { attention: 'notice', fields: { signal: 'string' } },
  mark: { attention: 'info', fields: { note: 'string', by: 'string' } },
  cutoff_changed: {
    attention: 'info',
    fields: { cutoff_V: 'number', cutoff_V_per_cell: 'number', by: 'string' },
  },
  cutoff_refused: {
    attention: 'notice',
    fields: { requested_V: 'number', by: 'string', why: 'string' },
  },
  calibration_changed: {
    attention: 'info',
    fields: { old_id: 'string', new_id: 'string', file: 'string' },
  },
  calibration_rejected: { attention: 'alarm', fields: { ...FILE_ERROR, kept_id: 'string' } },
  chemistry_changed: {
    attention: 'info',
    fields: {
      file: 'string',
      chemistry: 'string',
      floor_V: 'number',
      cutoff_V: 'number',
      max_temperature_C: 'number',
    },
  },
  chemistry_rejected: { attention: 'alarm', fields: FILE_ERROR },
  compress_failed: { attention: 'info', fields: { ...FILE_ERROR, ...NOTE } },
  sample_file_compressed: {
    attention: 'info',
    fields: { file: 'string', bytes_in: 'integer', bytes_out: 'integer' },
  },
  // The live feed's visitors.
  live_refused: { attention: 'info', fields: { remote: 'string?', path: 'string', why: 'string' } },
  live_viewer_joined: { attention: 'info', fields: { remote: 'string', viewers: 'integer' } },
  live_viewer_left: {
    attention: 'info',
    fields: {
      remote: 'string',
      code: 'integer',
      why: 'string',
      coalesced: 'integer',
      viewers: 'integer',
    },
  },
  live_viewer_dropped: { attention: 'info', fields: { remote: 'string', why: 'string' } },
  live_control: {
    attention: 'info',
    fields: {
      remote: 'string',
      type: 'string?',
      request: 'string?',
      cutoff_V: 'number?',
      note: 'string?',
      ok: 'boolean',
      why: 'string?',
    },
  },
  live_events_suppressed: { attention: 'info', fields: { count: 'integer', seconds: 'number' } },
  live_error: { attention: 'info', fields: { why: 'string' } },
} as const satisfies Record<string, KindSpec>;

export type EventKind = keyof typeof EVENT_KINDS;

type Base<S> = S extends `${infer B}?` ? B : S;
type FieldValue<S> =
  Base<S> extends 'string'
    ? string
    : Base<S> extends 'number' | 'integer'
      ? number
      : Base<S> extends 'boolean'
        ? boolean
        : Base<S> extends 'strings'
          ? string[]
          : Base<S> extends 'counts'
            ? Record<string, number>
            : Base<S> extends 'number|null'
              ? number | null
              : Base<S> extends 'string|null'
                ? string | null
                : never;
type Fields<F> = {
  -readonly [K in keyof F as F[K] extends `${string}?` ? never : K]: FieldValue<F[K]>;
} & {
  // Absent and undefined alike: JSON leaves an undefined field out.
  -readonly [K in keyof F as F[K] extends `${string}?` ? K : never]?: FieldValue<F[K]> | undefined;
};
type Flat<T> = { [K in keyof T]: T[K] };

/** The fields of one kind of event. */
export type EventDetail<K extends EventKind> = Flat<Fields<(typeof EVENT_KINDS)[K]['fields']>>;

/** One event as the daemon makes it: its kind and its fields. */
export type RunEvent = { [K in EventKind]: Flat<{ event: K } & EventDetail<K>> }[EventKind];

/** The events the live feed's server logs. */
export type LiveFeedEvent = Extract<RunEvent, { event: `live_${string}` }>;

/** A line of events.jsonl: when, then the event. */
export type EventRecord = { host_s: number; wall_time: string } & RunEvent;

/** The end reasons that are a safety limit tripping (exit 3), not the normal end of a run. */
export const SAFETY_ENDS: ReadonlySet<SessionEnd> = new Set<SessionEnd>(SAFETY_END_REASONS);

export function isEventKind(name: string): name is EventKind {
  return Object.hasOwn(EVENT_KINDS, name);
}

export function attentionOf(kind: EventKind): Attention {
  return EVENT_KINDS[kind].attention;
}

/** An event that calls for attention in the report: an alarm or a notice, or a run ended on a safety limit. */
export function flaggedInReport(e: { event: string; end_reason?: unknown }): boolean {
  if (!isEventKind(e.event)) return false;
  if (e.event === 'run_ended') return SAFETY_ENDS.has(e.end_reason as SessionEnd);
  return EVENT_KINDS[e.event].attention !== 'info';
}
