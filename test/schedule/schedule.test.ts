import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';
import { parseDuration } from '../../src/schedule/duration.js';
import {
  CONTINUOUS,
  describeSchedule,
  loadOnMsUntil,
  loadPlanAt,
  parseScheduleOption,
  serviceOutput,
  type Schedule,
} from '../../src/schedule/schedule.js';
import { parseScheduleYaml } from '../../src/schedule/schedule-file.js';

const S = 1000;
const MIN = 60_000;
const H = 3_600_000;

function refusal(f: () => unknown): CellvigilError {
  try {
    f();
  } catch (e) {
    expect(e).toBeInstanceOf(CellvigilError);
    return e as CellvigilError;
  }
  throw new Error('accepted');
}

/** Load-on time found by walking the plan from change to change: independent of loadOnMsUntil's arithmetic. */
function walkedOnMs(s: Schedule, untilMs: number): number {
  let t = 0;
  let on = 0;
  while (t < untilMs) {
    const p = loadPlanAt(s, t);
    const next = Math.min(untilMs, p.nextChangeMs ?? Infinity);
    if (p.on) on += next - t;
    t = next;
  }
  return on;
}

describe('durations', () => {
  it('need a unit', () => {
    expect(parseDuration('15 s')).toBe(15 * S);
    expect(parseDuration('1.5h')).toBe(1.5 * H);
    expect(parseDuration('2 Minutes')).toBe(2 * MIN);
    expect(parseDuration('15')).toBeNull();
  });
});

describe('duty cycle: on X s every Y s', () => {
  const s = parseScheduleOption('on 15 s every 1 min');

  it('yields the exact on-time: n whole periods of X plus what the current period has had (arithmetic)', () => {
    expect(loadOnMsUntil(s, 10 * MIN + 20 * S)).toBe(10 * 15 * S + 15 * S);
    expect(loadOnMsUntil(s, 10 * MIN + 7 * S)).toBe(10 * 15 * S + 7 * S);
    expect(loadOnMsUntil(s, 10 * MIN)).toBe(10 * 15 * S);
    expect(serviceOutput(s, 4 * H).loadOnHours).toBe(1);
  });

  it('switches at the period boundaries and says when the next change is due', () => {
    expect(loadPlanAt(s, 0)).toEqual({ on: true, finished: false, nextChangeMs: 15 * S });
    expect(loadPlanAt(s, 15 * S)).toEqual({ on: false, finished: false, nextChangeMs: 60 * S });
    expect(loadPlanAt(s, 59_999)).toEqual({ on: false, finished: false, nextChangeMs: 60 * S });
    expect(loadPlanAt(s, 60 * S)).toEqual({ on: true, finished: false, nextChangeMs: 75 * S });
  });

  it('the on-time by arithmetic equals the on-time walked change by change, for any schedule shape and time', () => {
    const shape = fc.record({
      on: fc.integer({ min: 1, max: 120 }),
      off: fc.integer({ min: 1, max: 120 }),
      windowH: fc.integer({ min: 1, max: 23 }),
      rest: fc.integer({ min: 0, max: 600 }),
    });
    fc.assert(
      fc.property(shape, fc.integer({ min: 0, max: 3 * 24 * 3600 }), (x, tS) => {
        const sched = parseScheduleOption(
          `on ${x.on} s every ${x.on + x.off} s, ${x.windowH} h per day${x.rest ? `, rest ${x.rest} s` : ''}`,
        );
        return loadOnMsUntil(sched, tS * S) === walkedOnMs(sched, tS * S);
      }),
      { numRuns: 200 },
    );
  });
});

describe("IEC 60086-2 application-test shapes (from memory of the standard's table)", () => {
  it('43 Ω for 4 h a day to 0.9 V', () => {
    const s = parseScheduleOption('43 ohm, 4 h per day, to 0.9 V');
    expect(s.loadOhm).toBe(43);
    expect(s.endPointVPerCell).toBe(0.9);
    expect(loadPlanAt(s, 0)).toEqual({ on: true, finished: false, nextChangeMs: 4 * H });
    expect(loadPlanAt(s, 4 * H)).toEqual({ on: false, finished: false, nextChangeMs: 24 * H });
    // End point reached 3 h into day 6: 5 days × 4 h + 3 h of service.
    const out = serviceOutput(s, 5 * 24 * H + 3 * H);
    expect(out.loadOnHours).toBe(23);
    expect(out.completedCycles).toBe(5);
  });

  it('24 Ω for 15 s each minute for 8 h a day to 1.0 V', () => {
    const s = parseScheduleOption('24 ohm, on 15 s every 1 min, 8 h per day, to 1.0 V');
    expect(s.loadOhm).toBe(24);
    expect(s.endPointVPerCell).toBe(1.0);
    expect(loadOnMsUntil(s, 24 * H)).toBe(2 * H);
    expect(loadPlanAt(s, 8 * H - 30 * S)).toEqual({
      on: false,
      finished: false,
      nextChangeMs: 24 * H,
    });
    expect(loadPlanAt(s, 24 * H + 10 * S)).toEqual({
      on: true,
      finished: false,
      nextChangeMs: 24 * H + 15 * S,
    });
  });

  it('3.9 Ω for 1 h a day to 0.8 V, also as a schedule file', () => {
    const fromText = parseScheduleOption('3.9 ohm, 1 h per day, to 0.8 V');
    const fromFile = parseScheduleYaml(
      'description: heavy daily load\nload_ohm: 3.9\ndaily: 1 h\nend_point_V_per_cell: 0.8\n',
      'lr6-heavy.yaml',
    );
    expect({ ...fromFile, description: '' }).toEqual({ ...fromText, description: '' });
    expect(fromFile.description).toBe('heavy daily load');
    expect(loadOnMsUntil(fromFile, 3 * 24 * H + 30 * MIN)).toBe(3 * H + 30 * MIN);
  });

  it('the 15 s / 1 min / 8 h shape written as a file with a pulse inside a daily window', () => {
    const s = parseScheduleYaml(
      'load_ohm: 24\npulse: { on: 15 s, every: 1 min }\ndaily: 8 h\nend_point_V_per_cell: 1.0\n',
      'lr6-pulse.yaml',
    );
    expect(describeSchedule(s)).toBe('24 ohm, on 15 s every 1 min, 8 h per day, to 1 V');
    expect(loadOnMsUntil(s, 24 * H)).toBe(2 * H);
  });
});

describe('schedules: other shapes', () => {
  it('continuous: on until the end point', () => {
    const s = parseScheduleOption('continuous');
    expect(s.steps).toEqual(CONTINUOUS.steps);
    expect(loadPlanAt(s, 5 * H)).toEqual({ on: true, finished: false, nextChangeMs: null });
    expect(loadOnMsUntil(s, 5 * H)).toBe(5 * H);
  });

  it('a rest first, then the load', () => {
    const s = parseScheduleOption('rest 30 min, continuous');
    expect(loadPlanAt(s, 10 * MIN)).toEqual({ on: false, finished: false, nextChangeMs: 30 * MIN });
    expect(loadOnMsUntil(s, 90 * MIN)).toBe(60 * MIN);
  });

  it('explicit steps with rests, repeated or run once', () => {
    const text =
      'steps:\n  - load: 10 min\n  - rest: 50 min\n  - load: 2 min\n    pulse: { on: 10 s, every: 30 s }\n  - rest: 1 h\n';
    const s = parseScheduleYaml(text, 'steps.yaml');
    // One cycle: 10 min plus 4 pulses of 10 s.
    expect(loadOnMsUntil(s, 2 * H + 2 * MIN)).toBe(10 * MIN + 40 * S);
    expect(loadOnMsUntil(s, 4 * H + 4 * MIN)).toBe(2 * (10 * MIN + 40 * S));
    const once = parseScheduleYaml(`${text}repeat: false\n`, 'once.yaml');
    expect(loadPlanAt(once, 2 * H + 2 * MIN)).toEqual({
      on: false,
      finished: true,
      nextChangeMs: null,
    });
    expect(loadPlanAt(once, 30 * MIN)).toEqual({
      on: false,
      finished: false,
      nextChangeMs: 60 * MIN,
    });
    expect(loadPlanAt(once, 61 * MIN)).toEqual({
      on: true,
      finished: false,
      nextChangeMs: 61 * MIN + 10 * S,
    });
    // The last rest runs into the end of the schedule: the next change is the finish.
    expect(loadPlanAt(once, 63 * MIN)).toEqual({
      on: false,
      finished: false,
      nextChangeMs: 2 * H + 2 * MIN,
    });
  });

  it('refuses what it cannot mean, naming the key and the fix', () => {
    const cases: Array<[() => unknown, string]> = [
      [
        () => parseScheduleOption('on 1 min every 30 s'),
        'pulse.on (1 min) must be shorter than pulse.every (30 s)',
      ],
      [() => parseScheduleOption('25 h per day'), 'more than a day'],
      [
        () => parseScheduleOption('continuous, 4 h per day'),
        'continuous cannot be combined with daily',
      ],
      [() => parseScheduleOption('sometimes'), '"sometimes" is not a schedule clause'],
      [() => parseScheduleOption('on 15 every 60 s'), 'pulse.on "15" has no unit'],
      [() => parseScheduleOption('on 15 every 1 min'), 'e.g. "15 s" or "15 min"'],
      [
        () => parseScheduleYaml('daily: 4 h\nrepat: true\n', 's.yaml'),
        'repat is not a schedule key',
      ],
      [
        () => parseScheduleYaml('steps:\n  - load: until end\n  - rest: 1 h\n', 's.yaml'),
        'only the last step'.replace('only', 'Only'),
      ],
      [
        () => parseScheduleYaml('steps:\n  - rest: 1 h\n    load: 2 h\n', 's.yaml'),
        'exactly one of load and rest',
      ],
    ];
    for (const [f, text] of cases) {
      const e = refusal(f);
      expect(e.code).toBe(ErrorCodes.CONFIG_INVALID);
      expect(e.message).toContain(text);
    }
    // An inline duration without a unit is not "counted as seconds": the message must not say so.
    expect(refusal(() => parseScheduleOption('on 15 every 1 min')).message).not.toContain(
      'bare number counts as seconds',
    );
  });

  it('a --schedule naming a file that is not there says so, not "not a schedule clause"', () => {
    for (const name of ['plans/pulsed.yaml', 'pulsed.yaml', './sched']) {
      const e = refusal(() => parseScheduleOption(name));
      expect(e.code).toBe(ErrorCodes.CONFIG_READ);
      expect(e.message).toContain(`there is no schedule file "${name}"`);
      expect(e.message).not.toContain('schedule clause');
    }
  });
});
