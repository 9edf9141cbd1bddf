/**
 * Discharge schedules (docs/schedules.md): when the load is on, as a pure function of the time
 * since the discharge started. The daemon asks `loadPlanAt` what to do now and when to ask
 * again; the report turns the time the end point was reached into service output.
 */
import { ErrorCodes, makeError } from '../core/errors.js';
import { formatDuration, parseDuration } from './duration.js';
import type { ScheduleSpec } from './schedule-schema.js';
import { durationProblem, looksLikeFileName, missingScheduleFile } from './option-hints.js';

export interface Pulse {
  onMs: number;
  everyMs: number;
}

export interface ScheduleStep {
  load: boolean;
  /** Infinity: until the end point (only the last step). */
  durationMs: number;
  /** With the load step: on for `onMs` at the start of every `everyMs`. */
  pulse: Pulse | null;
}

export interface Schedule {
  description: string;
  /** Load off this long before the first step (an open-circuit rest). */
  restFirstMs: number;
  /** One cycle. */
  steps: ScheduleStep[];
  /** The cycle repeats until the end point; otherwise the schedule finishes after one cycle. */
  repeat: boolean;
  endPointVPerCell: number | null;
  /** The load resistance the test calls for (the rig must be fitted with it). */
  loadOhm: number | null;
}

export interface LoadPlan {
  /** The load should be on now. */
  on: boolean;
  /** The schedule has run its course: the load stays off and the run may end. */
  finished: boolean;
  /** Elapsed ms at which `on` or `finished` next changes; null when never. */
  nextChangeMs: number | null;
}

export interface ServiceOutput {
  /** Load-on time from the start to the end point, h: the service output. */
  loadOnHours: number;
  /** Time from the start to the end point, h. */
  elapsedHours: number;
  /** Whole cycles completed (days for a daily schedule). */
  completedCycles: number;
}

const DAY_MS = 86_400_000;

/** Load on until the end point. */
export const CONTINUOUS: Schedule = {
  description: 'continuous',
  restFirstMs: 0,
  steps: [{ load: true, durationMs: Infinity, pulse: null }],
  repeat: false,
  endPointVPerCell: null,
  loadOhm: null,
};

/** A schedule error: what was wrong, where, and (by default) where the format is described. */
export function invalidSchedule(
  what: string,
  where: string,
  fix = 'See docs/schedules.md for the schedule format.',
): Error {
  return makeError(ErrorCodes.CONFIG_INVALID, what, where, fix);
}

function durationMs(value: string | number, where: string, key: string): number {
  const ms = typeof value === 'number' ? value * 1000 : parseDuration(value);
  if (ms === null || !Number.isFinite(ms) || ms <= 0) {
    const { what, fix } = durationProblem(value, key);
    throw invalidSchedule(what, where, fix);
  }
  return ms;
}

function pulseOf(
  p: { on: string | number; every: string | number },
  where: string,
  key: string,
): Pulse {
  const onMs = durationMs(p.on, where, `${key}.on`);
  const everyMs = durationMs(p.every, where, `${key}.every`);
  if (onMs >= everyMs) {
    throw invalidSchedule(
      `${key}.on (${formatDuration(onMs)}) must be shorter than ${key}.every (${formatDuration(everyMs)})`,
      where,
      'A pulse is on for part of each period; for a load that stays on, leave the pulse out.',
    );
  }
  return { onMs, everyMs };
}

/** Turns a validated spec (from a file or an option string) into a schedule. */
export function buildSchedule(spec: ScheduleSpec, where: string): Schedule {
  const shapes = (['continuous', 'pulse', 'daily', 'steps'] as const).filter(
    (k) => spec[k] !== undefined && spec[k] !== false,
  );
  if (shapes.includes('continuous') && shapes.length > 1) {
    throw invalidSchedule(
      `continuous cannot be combined with ${shapes.filter((s) => s !== 'continuous').join(' and ')}`,
      where,
      'Give continuous alone, or a pulse and/or daily hours, or explicit steps.',
    );
  }
  if (shapes.includes('steps') && shapes.length > 1) {
    throw invalidSchedule(
      `steps cannot be combined with ${shapes.filter((s) => s !== 'steps').join(' and ')}`,
      where,
      'Put the pulse inside a step ({ load: 8 h, pulse: { on: 15 s, every: 1 min } }) instead.',
    );
  }
  if (spec.repeat !== undefined && !shapes.includes('steps')) {
    throw invalidSchedule(
      'repeat applies to steps only',
      where,
      'Remove repeat, or write the schedule as steps.',
    );
  }
  const base = {
    restFirstMs:
      spec.rest_first !== undefined ? durationMs(spec.rest_first, where, 'rest_first') : 0,
    endPointVPerCell: spec.end_point_V_per_cell ?? null,
    loadOhm: spec.load_ohm ?? null,
  };
  let steps: ScheduleStep[];
  let repeat = true;
  if (spec.steps) {
    steps = spec.steps.map((s, i) => stepOf(s, i, spec.steps!.length, where));
    repeat = spec.repeat ?? true;
    if (steps.at(-1)!.durationMs === Infinity) repeat = false;
  } else {
    const pulse = spec.pulse ? pulseOf(spec.pulse, where, 'pulse') : null;
    const windowMs = spec.daily !== undefined ? durationMs(spec.daily, where, 'daily') : null;
    if (windowMs !== null && windowMs > DAY_MS) {
      throw invalidSchedule(
        `daily (${formatDuration(windowMs)}) is more than a day`,
        where,
        'Give the load hours per day, at most 24 h.',
      );
    }
    if (windowMs !== null && windowMs < DAY_MS) {
      steps = [
        { load: true, durationMs: windowMs, pulse },
        { load: false, durationMs: DAY_MS - windowMs, pulse: null },
      ];
    } else if (pulse) {
      steps = [
        { load: true, durationMs: pulse.onMs, pulse: null },
        { load: false, durationMs: pulse.everyMs - pulse.onMs, pulse: null },
      ];
    } else {
      steps = CONTINUOUS.steps;
      repeat = false;
    }
  }
  const schedule: Schedule = { description: '', ...base, steps, repeat };
  return { ...schedule, description: spec.description ?? describeSchedule(schedule) };
}

function stepOf(
  s: NonNullable<ScheduleSpec['steps']>[number],
  i: number,
  count: number,
  where: string,
): ScheduleStep {
  const key = `steps[${i}]`;
  if ((s.load === undefined) === (s.rest === undefined)) {
    throw invalidSchedule(
      `${key} must have exactly one of load and rest`,
      where,
      'Write each step as { load: <duration> } or { rest: <duration> }.',
    );
  }
  if (s.rest !== undefined) {
    if (s.pulse)
      throw invalidSchedule(
        `${key} is a rest and cannot have a pulse`,
        where,
        'Move the pulse to a load step.',
      );
    return { load: false, durationMs: durationMs(s.rest, where, `${key}.rest`), pulse: null };
  }
  const untilEnd = typeof s.load === 'string' && /^\s*until (the )?end( point)?\s*$/i.test(s.load);
  if (untilEnd && i !== count - 1) {
    throw invalidSchedule(
      `${key}.load is "until end" but steps follow it`,
      where,
      'Only the last step can last until the end point.',
    );
  }
  return {
    load: true,
    durationMs: untilEnd ? Infinity : durationMs(s.load!, where, `${key}.load`),
    pulse: s.pulse ? pulseOf(s.pulse, where, `${key}.pulse`) : null,
  };
}

const NUMBER = '(\\d+(?:\\.\\d+)?|\\.\\d+)';
const CLAUSES: Array<[RegExp, (m: RegExpExecArray, spec: ScheduleSpec) => void]> = [
  [/^continuous$/, (_m, s) => void (s.continuous = true)],
  [/^on (.+?) every (.+)$/, (m, s) => void (s.pulse = { on: m[1]!, every: m[2]! })],
  [/^(?:for )?(.+?) (?:per|a|each) day$/, (m, s) => void (s.daily = m[1]!)],
  [/^rest (.+?)(?: first)?$/, (m, s) => void (s.rest_first = m[1]!)],
  [
    new RegExp(`^to ${NUMBER} ?v(?: per cell)?$`),
    (m, s) => void (s.end_point_V_per_cell = Number(m[1])),
  ],
  [new RegExp(`^${NUMBER} ?(?:ohms?|Ω)$`), (m, s) => void (s.load_ohm = Number(m[1]))],
];

/**
 * Parses the option form: clauses separated by commas, e.g.
 * `24 ohm, on 15 s every 1 min, 8 h per day, to 1.0 V`.
 */
export function parseScheduleOption(text: string, where = '--schedule'): Schedule {
  const spec: ScheduleSpec = {};
  const seen = new Set<number>();
  const clauses = text
    .split(/[,;]/)
    .map((c) => c.trim().replace(/\s+/g, ' ').toLowerCase())
    .filter((c) => c !== '');
  if (clauses.length === 0)
    throw invalidSchedule(
      'the schedule is empty',
      where,
      'Give e.g. "continuous" or "on 15 s every 1 min, 8 h per day, to 1.0 V".',
    );
  if (looksLikeFileName(text)) throw missingScheduleFile(text, where);
  for (const clause of clauses) {
    const i = CLAUSES.findIndex(([re]) => re.test(clause));
    if (i < 0) {
      throw invalidSchedule(
        `"${clause}" is not a schedule clause`,
        where,
        'Use clauses such as: continuous; on 15 s every 1 min; 4 h per day; rest 30 min; to 0.9 V; 43 ohm — separated by commas.',
      );
    }
    if (seen.has(i))
      throw invalidSchedule(
        `"${clause}" repeats a clause already given`,
        where,
        'Give each kind of clause once.',
      );
    seen.add(i);
    const [re, apply] = CLAUSES[i]!;
    apply(re.exec(clause)!, spec);
  }
  return buildSchedule(spec, where);
}

/** A readable one-line description (also a valid option string for the simple shapes). */
export function describeSchedule(s: Schedule): string {
  const parts: string[] = [];
  if (s.loadOhm !== null) parts.push(`${s.loadOhm} ohm`);
  if (s.restFirstMs > 0) parts.push(`rest ${formatDuration(s.restFirstMs)} first`);
  const [a, b] = s.steps;
  const daily =
    s.repeat &&
    s.steps.length === 2 &&
    a!.load &&
    !b!.load &&
    a!.durationMs + b!.durationMs === DAY_MS;
  if (daily) {
    if (a!.pulse)
      parts.push(`on ${formatDuration(a!.pulse.onMs)} every ${formatDuration(a!.pulse.everyMs)}`);
    parts.push(`${formatDuration(a!.durationMs)} per day`);
  } else if (s.repeat && s.steps.length === 2 && a!.load && !a!.pulse && !b!.load) {
    parts.push(
      `on ${formatDuration(a!.durationMs)} every ${formatDuration(a!.durationMs + b!.durationMs)}`,
    );
  } else if (s.steps.length === 1 && a!.load && a!.durationMs === Infinity && !a!.pulse) {
    parts.push('continuous');
  } else {
    const steps = s.steps.map((st) =>
      st.load
        ? `load ${formatDuration(st.durationMs)}${st.pulse ? ` (on ${formatDuration(st.pulse.onMs)} every ${formatDuration(st.pulse.everyMs)})` : ''}`
        : `rest ${formatDuration(st.durationMs)}`,
    );
    parts.push(`${steps.join(' then ')}${s.repeat ? ', repeated' : ''}`);
  }
  if (s.endPointVPerCell !== null) parts.push(`to ${s.endPointVPerCell} V`);
  return parts.join(', ');
}

function cycleMs(s: Schedule): number {
  return s.steps.reduce((t, st) => t + st.durationMs, 0);
}

/** Load-on ms within the first `p` ms of a step (p ≤ its duration). */
function stepOnMs(st: ScheduleStep, p: number): number {
  if (!st.load) return 0;
  if (!st.pulse) return p;
  const whole = Math.floor(p / st.pulse.everyMs);
  return whole * st.pulse.onMs + Math.min(st.pulse.onMs, p - whole * st.pulse.everyMs);
}

/** Load-on ms within the first `p` ms of a cycle. */
function cycleOnMs(s: Schedule, p: number): number {
  let on = 0;
  let left = p;
  for (const st of s.steps) {
    if (left <= 0) break;
    const d = Math.min(left, st.durationMs);
    on += stepOnMs(st, d);
    left -= d;
  }
  return on;
}

interface Interval {
  on: boolean;
  finished: boolean;
  /** Elapsed ms at which this constant interval ends (Infinity: never). */
  endMs: number;
}

/** The constant interval containing `t` (intervals are half open: [start, end)). */
function intervalAt(s: Schedule, t: number): Interval {
  if (t < s.restFirstMs) return { on: false, finished: false, endMs: s.restFirstMs };
  const u = t - s.restFirstMs;
  const c = cycleMs(s);
  let origin = s.restFirstMs;
  let v = u;
  if (s.repeat && Number.isFinite(c)) {
    const k = Math.floor(u / c);
    origin += k * c;
    v -= k * c;
  } else if (u >= c) {
    return { on: false, finished: true, endMs: Infinity };
  }
  let stepStart = 0;
  let i = 0;
  // The last step takes whatever rounding leaves at the very end of a cycle.
  while (i < s.steps.length - 1 && v >= stepStart + s.steps[i]!.durationMs)
    stepStart += s.steps[i++]!.durationMs;
  const st = s.steps[i]!;
  const stepEnd = stepStart + st.durationMs;
  if (!st.load || !st.pulse) return { on: st.load, finished: false, endMs: origin + stepEnd };
  const { onMs, everyMs } = st.pulse;
  const j = Math.floor((v - stepStart) / everyMs);
  const periodStart = stepStart + j * everyMs;
  const on = v - periodStart < onMs;
  return {
    on,
    finished: false,
    endMs: origin + Math.min(stepEnd, periodStart + (on ? onMs : everyMs)),
  };
}

/** Whether the load should be on `elapsedMs` after the discharge started, and when that changes. */
export function loadPlanAt(s: Schedule, elapsedMs: number): LoadPlan {
  const now = intervalAt(s, Math.max(0, elapsedMs));
  let end = now.endMs;
  // Adjacent intervals of the same state merge; a full cycle without a change never changes.
  for (let i = 0; i < 2 * s.steps.length + 4 && Number.isFinite(end); i++) {
    const next = intervalAt(s, end);
    if (next.on !== now.on || next.finished !== now.finished)
      return { on: now.on, finished: now.finished, nextChangeMs: end };
    end = next.endMs;
  }
  return { on: now.on, finished: now.finished, nextChangeMs: null };
}

/** Load-on ms from the start to `elapsedMs`, exactly. */
export function loadOnMsUntil(s: Schedule, elapsedMs: number): number {
  const u = elapsedMs - s.restFirstMs;
  if (u <= 0) return 0;
  const c = cycleMs(s);
  if (!s.repeat || !Number.isFinite(c)) return cycleOnMs(s, Math.min(u, c));
  const k = Math.floor(u / c);
  return k * cycleOnMs(s, c) + cycleOnMs(s, u - k * c);
}

/** Service output: load-on hours from the start to the moment the end point was reached. */
export function serviceOutput(s: Schedule, endPointAtMs: number): ServiceOutput {
  const c = cycleMs(s);
  const u = Math.max(0, endPointAtMs - s.restFirstMs);
  return {
    loadOnHours: loadOnMsUntil(s, endPointAtMs) / 3_600_000,
    elapsedHours: endPointAtMs / 3_600_000,
    completedCycles: s.repeat && Number.isFinite(c) ? Math.floor(u / c) : u >= c ? 1 : 0,
  };
}
