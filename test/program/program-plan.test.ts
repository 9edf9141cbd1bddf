import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';
import { packagePath } from '../../src/core/paths.js';
import { CellvigilError } from '../../src/core/errors.js';
import { loadProgram, parseProgram } from '../../src/program/program-file.js';
import { planProgram } from '../../src/program/program-plan.js';

const chem = loadChemistries();
const byId = (id: string) => findChemistry(chem, id);

function caught(fn: () => unknown): CellvigilError {
  try {
    fn();
  } catch (err) {
    expect(err).toBeInstanceOf(CellvigilError);
    return err as CellvigilError;
  }
  throw new Error('expected an error, got none');
}

const prog = (steps: string, head = 'name: t\nrated_Ah: 2.5\n') =>
  parseProgram(`${head}steps:\n${steps}`, 'p.yaml');

describe('the shipped example programs', () => {
  it('capacity-check: three cycles of charge, rest 1 h, 0.2 C discharge, rest, then storage', async () => {
    const file = await loadProgram(packagePath(join('config', 'programs', 'capacity-check.yaml')));
    const plan = planProgram(file, { profile: byId('li-ion'), cells: 1, where: 'x' });
    expect(plan.steps).toHaveLength(13);
    expect(plan.steps.map((s) => s.cycle)).toEqual([1, 1, 1, 1, 2, 2, 2, 2, 3, 3, 3, 3, null]);
    // 0.2 C of 2.5 Ah = 0.5 A; 0.05 C = 0.125 A; Li-ion 4.2 V, storage 3.8 V (common practice)
    const [charge, rest, discharge] = plan.steps.map((s) => s.plan);
    expect(charge).toMatchObject({ kind: 'charge', targetV: 4.2, currentA: 1.25 });
    expect((charge as { doneBelowA: number }).doneBelowA).toBeCloseTo(0.125, 12);
    expect(rest).toMatchObject({ kind: 'rest', durationS: 3600, settleVPerS: null });
    expect(discharge).toMatchObject({ load: { type: 'constant_current', A: 0.5 }, cutoffV: 3.0 });
    expect(plan.steps[12]!.plan).toMatchObject({ kind: 'storage', targetV: 3.8 });
  });

  it('nimh-standard: charger-ended at 0.5 C, settled rest, 0.2 C to 1.0 V (IEC 61951-2, from memory)', async () => {
    const file = await loadProgram(packagePath(join('config', 'programs', 'nimh-standard.yaml')));
    const plan = planProgram(file, { profile: byId('nimh'), cells: 4, where: 'x' });
    expect(plan.steps[0]!.plan).toMatchObject({
      method: 'charger',
      currentA: 1.0,
      timeoutS: 4 * 3600,
    });
    expect(plan.steps[2]!.plan).toMatchObject({ cutoffV: 4.0 });
  });
});

describe('a program checked against the chemistry at load time', () => {
  it('4.3 V per cell on a 4.2 V Li-ion is refused, naming the file, the step and the key', () => {
    const e = caught(() =>
      planProgram(prog('  - charge: { V_per_cell: 4.3 }\n'), {
        profile: byId('li-ion'),
        cells: 2,
        where: 'p.yaml',
      }),
    );
    expect(e.code).toBe('CV_CONFIG_INVALID');
    expect(e.message).toContain('p.yaml, steps[0].charge, key V_per_cell');
    expect(e.message).toContain('above the li-ion ceiling of 4.2 V');
  });

  it('a cutoff below the floor is refused as below the floor (Li-ion 2.5 V, common practice)', () => {
    const e = caught(() =>
      planProgram(prog('  - discharge: { current_A: 1, cutoff_V_per_cell: 2.4 }\n'), {
        profile: byId('li-ion'),
        cells: 1,
        where: 'p.yaml',
      }),
    );
    expect(e.code).toBe('CV_CUTOFF_BELOW_FLOOR');
  });

  it('charging an alkaline cell is refused (primary cells, common practice)', () => {
    const e = caught(() =>
      planProgram(prog('  - charge: {}\n'), { profile: byId('alkaline'), cells: 1, where: 'p' }),
    );
    expect(e.message).toContain('must never be charged');
  });

  it('cc-cv on a nickel chemistry is refused; it charges by the charger', () => {
    const e = caught(() =>
      planProgram(prog('  - charge: { until: cc-cv }\n'), {
        profile: byId('nimh'),
        cells: 1,
        where: 'p',
      }),
    );
    expect(e.message).toContain('key until');
  });

  it('storage anywhere but last, or for a chemistry without a storage voltage, is refused', () => {
    expect(
      caught(() =>
        planProgram(prog('  - storage: {}\n  - rest: { minutes: 1 }\n'), {
          profile: byId('li-ion'),
          cells: 1,
          where: 'p',
        }),
      ).message,
    ).toContain('storage must be the last step');
    expect(
      caught(() =>
        planProgram(prog('  - storage: {}\n'), { profile: byId('nimh'), cells: 1, where: 'p' }),
      ).message,
    ).toContain('names no storage voltage');
  });

  it('C-rates without a rated capacity are refused', () => {
    const e = caught(() =>
      planProgram(prog('  - discharge: { current_C: 0.2 }\n', 'name: t\n'), {
        profile: byId('li-ion'),
        cells: 1,
        where: 'p',
      }),
    );
    expect(e.message).toContain('no rated capacity');
  });

  it("a timed charge longer than the profile's timeout is refused (NiMH 16 h, IEC 61951-2, from memory)", () => {
    const ok = planProgram(prog('  - charge: { until: time, hours: 16, current_C: 0.1 }\n'), {
      profile: byId('nimh'),
      cells: 1,
      where: 'p',
    });
    expect(ok.steps[0]!.plan).toMatchObject({ method: 'time', durationS: 57600, doneBelowA: null });
    const e = caught(() =>
      planProgram(prog('  - charge: { until: time, hours: 17 }\n'), {
        profile: byId('nimh'),
        cells: 1,
        where: 'p',
      }),
    );
    expect(e.message).toContain('17 h');
  });
});

describe('program file shape', () => {
  it('an unknown key is named with the keys allowed', () => {
    const e = caught(() => prog('  - rest: { minutes: 5, hours: 1 }\n'));
    expect(e.message).toContain('p.yaml, key steps.0.rest.hours');
  });

  it('two loads in one discharge step are refused', () => {
    const e = caught(() => prog('  - discharge: { current_A: 1, power_W: 3 }\n'));
    expect(e.message).toContain('Give exactly one of: current_A, current_C, power_W, resistor');
  });

  it('a rest by settling needs its longest time', () => {
    expect(() => prog('  - rest: { settle_mV_per_min: 1 }\n')).toThrow(CellvigilError);
  });

  it('a repeat inside a repeat is refused', () => {
    expect(() =>
      prog(
        '  - repeat: { times: 2, steps: [ { repeat: { times: 2, steps: [ { rest: { minutes: 1 } } ] } } ] }\n',
      ),
    ).toThrow(CellvigilError);
  });
});
