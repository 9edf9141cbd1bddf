/**
 * events.jsonl: one JSON object a line, `host_s`, `wall_time`, `event` and the event's fields
 * (src/record/events.ts). The writer appends through the rotating log file; `parseEventLine`
 * is the reader's check of one line against the same definitions.
 */
import { Ajv, type ValidateFunction } from 'ajv';
import { LogFile } from '../sinks/log-file.js';
import {
  EVENT_KINDS,
  isEventKind,
  type EventKind,
  type EventRecord,
  type RunEvent,
} from './events.js';

export const EVENTS_FILE = 'events.jsonl';

/** Rejected lines logged one by one per minute before they are only counted (hostile input cannot fill the disk). */
export const REJECTED_PER_MINUTE = 50;

/**
 * Rig lines (`E`, `H`, `A`) of each kind logged one by one per minute before they are only
 * counted: a rig that repeats one at the link's full rate must not fill the disk either.
 */
export const RIG_LINES_PER_MINUTE = 20;

/** The rig's own lines, as events: logged within their per-minute budget. */
export type RigLineEvent = Extract<RunEvent, { event: 'rig_ack' | 'rig_hello' | 'rig_error' }>;

/**
 * An event of a kind this version does not define (written by a later one), kept whole so that
 * a report still counts and lists it.
 */
export interface ForeignEvent {
  host_s: number;
  wall_time: string;
  event: 'foreign';
  name: string;
  fields: Record<string, unknown>;
}

/** A line of events.jsonl as the reader returns it. */
export type LoggedEvent = EventRecord | ForeignEvent;

/** The events a run writes; each returned as the record written, for the run's observers. */
export class EventLog {
  private readonly file: LogFile;
  private minuteStart = -Infinity;
  private rejectedThisMinute = 0;
  private suppressed: Record<string, number> = {};
  private rigMinuteStart = -Infinity;
  private rigThisMinute: Record<string, number> = {};
  private rigSuppressed: Record<string, number> = {};

  constructor(dir: string) {
    this.file = new LogFile({ dir, name: EVENTS_FILE });
  }

  write(hostS: number, wallMs: number, event: RunEvent): EventRecord {
    const rec: EventRecord = {
      host_s: round3(hostS),
      wall_time: new Date(wallMs).toISOString(),
      ...event,
    };
    this.file.append(JSON.stringify(rec));
    return rec;
  }

  /**
   * An event a newer core emits that this table does not define yet: logged as it came, so
   * nothing is lost, and read back as a foreign event.
   */
  writeForeign(hostS: number, wallMs: number, name: string, detail: Record<string, unknown>): void {
    this.file.append(
      JSON.stringify({
        host_s: round3(hostS),
        wall_time: new Date(wallMs).toISOString(),
        event: name,
        ...detail,
      }),
    );
  }

  /** A rejected line: logged while under the per-minute budget, else counted for the summary. */
  rejected(hostS: number, wallMs: number, reason: string, detail: string, line: string): void {
    this.rollMinute(hostS, wallMs);
    if (this.rejectedThisMinute < REJECTED_PER_MINUTE) {
      this.rejectedThisMinute++;
      // Only printable ASCII of the line, shortened: the log must stay valid, readable text.
      const shown = line.replace(/[^\x20-\x7e]/g, '?').slice(0, 120);
      this.write(hostS, wallMs, { event: 'frame_rejected', reason, detail, line: shown });
    } else {
      this.suppressed[reason] = (this.suppressed[reason] ?? 0) + 1;
    }
  }

  /**
   * A rig line's event: written while its kind is under the per-minute budget, else counted for
   * the minute's summary. Returns the record written, or null when it was only counted.
   */
  rigLine(hostS: number, wallMs: number, event: RigLineEvent): EventRecord | null {
    if (hostS - this.rigMinuteStart >= 60) {
      this.summariseRigLines(hostS, wallMs);
      this.rigMinuteStart = hostS;
      this.rigThisMinute = {};
    }
    const n = this.rigThisMinute[event.event] ?? 0;
    if (n < RIG_LINES_PER_MINUTE) {
      this.rigThisMinute[event.event] = n + 1;
      return this.write(hostS, wallMs, event);
    }
    this.rigSuppressed[event.event] = (this.rigSuppressed[event.event] ?? 0) + 1;
    return null;
  }

  private summariseRigLines(hostS: number, wallMs: number): void {
    if (Object.keys(this.rigSuppressed).length === 0) return;
    this.write(hostS, wallMs, {
      event: 'rig_lines_summary',
      not_logged_by_kind: this.rigSuppressed,
    });
    this.rigSuppressed = {};
  }

  private rollMinute(hostS: number, wallMs: number): void {
    if (hostS - this.minuteStart < 60) return;
    this.summarise(hostS, wallMs);
    this.minuteStart = hostS;
    this.rejectedThisMinute = 0;
  }

  /** Writes the counts of rejected lines and rig lines not logged one by one, if any. */
  summarise(hostS: number, wallMs: number): void {
    this.summariseRigLines(hostS, wallMs);
    if (Object.keys(this.suppressed).length === 0) return;
    this.write(hostS, wallMs, { event: 'rejected_summary', not_logged_by_reason: this.suppressed });
    this.suppressed = {};
  }

  /** See LogFile.flush. */
  flush(sync = true): Promise<void> {
    return this.file.flush(sync);
  }

  close(): Promise<void> {
    return this.file.close();
  }
}

function round3(x: number): number {
  return Math.round(x * 1000) / 1000;
}

const FIELD_SCHEMAS: Record<string, object> = {
  string: { type: 'string' },
  number: { type: 'number' },
  integer: { type: 'integer' },
  boolean: { type: 'boolean' },
  strings: { type: 'array', items: { type: 'string' } },
  counts: { type: 'object', additionalProperties: { type: 'number' } },
  'number|null': { type: ['number', 'null'] },
  'string|null': { type: ['string', 'null'] },
};

const ENVELOPE = {
  type: 'object',
  required: ['host_s', 'wall_time', 'event'],
  properties: {
    host_s: { type: 'number' },
    wall_time: { type: 'string' },
    event: { type: 'string', minLength: 1 },
  },
};

/** One schema per kind from its field list; open, since later versions may add fields. */
function kindSchema(kind: EventKind): object {
  const properties: Record<string, object> = { ...ENVELOPE.properties, event: { const: kind } };
  const required = [...ENVELOPE.required];
  for (const [name, spec] of Object.entries(EVENT_KINDS[kind].fields)) {
    const optional = spec.endsWith('?');
    properties[name] = FIELD_SCHEMAS[optional ? spec.slice(0, -1) : spec]!;
    if (!optional) required.push(name);
  }
  return { type: 'object', required, properties };
}

/** The compiled checks: the envelope, and each kind's fields. */
export interface EventChecks {
  envelope: ValidateFunction;
  kinds: ReadonlyMap<EventKind, ValidateFunction>;
}

function compileEventChecks(): EventChecks {
  const ajv = new Ajv({ strict: true, allErrors: true });
  const kinds = new Map<EventKind, ValidateFunction>();
  for (const kind of Object.keys(EVENT_KINDS) as EventKind[])
    kinds.set(kind, ajv.compile(kindSchema(kind)));
  return { envelope: ajv.compile(ENVELOPE), kinds };
}

/** Compiled once, when the module loads: compiling every kind's schema costs more than reading a run's events. */
export const EVENT_CHECKS: EventChecks = compileEventChecks();

/** Checks one line of events.jsonl; a problem is returned as text for the reader's message. */
export function parseEventLine(
  text: string,
  checks: EventChecks = EVENT_CHECKS,
): { ok: true; event: LoggedEvent } | { ok: false; problem: string } {
  let data: unknown;
  try {
    data = JSON.parse(text);
  } catch (e) {
    return { ok: false, problem: `not JSON: ${(e as Error).message}` };
  }
  if (!checks.envelope(data))
    return { ok: false, problem: `not an event: ${describe(checks.envelope)}` };
  const { host_s, wall_time, event, ...fields } = data as {
    host_s: number;
    wall_time: string;
    event: string;
  };
  if (!isEventKind(event))
    return { ok: true, event: { host_s, wall_time, event: 'foreign', name: event, fields } };
  const check = checks.kinds.get(event)!;
  if (!check(data)) return { ok: false, problem: `a malformed ${event} event: ${describe(check)}` };
  return { ok: true, event: data as EventRecord };
}

function describe(check: ValidateFunction): string {
  const e = check.errors?.[0];
  if (!e) return 'invalid';
  const key = e.instancePath.split('/').filter(Boolean).join('.');
  return key ? `${key} ${e.message ?? 'is invalid'}` : (e.message ?? 'invalid');
}
