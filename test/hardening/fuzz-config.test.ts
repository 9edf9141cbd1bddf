/**
 * Random and mutated configuration files: each is either accepted or refused with the loader's
 * documented error (a CellvigilError with its code) whose message names the file and says what
 * to do. Never another exception type, whatever the bytes.
 */
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import fc from 'fast-check';
import { afterAll, describe, expect, it } from 'vitest';
import { parse as parseYaml, stringify as toYaml } from 'yaml';
import {
  fitQuantity,
  sealCalibration,
  calibrationId,
  type Calibration,
} from '../../src/calibration/calibration.js';
import { parseCalibration } from '../../src/calibration/calibration-file.js';
import { AnalogChain } from '../../src/chain/analog-chain.js';
import { parseRigProfile } from '../../src/chain/rig-profile-file.js';
import { parseChemistries } from '../../src/chemistry/chemistry-file.js';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';
import { loadScenarios } from '../../src/sim/scenarios.js';
import { BENCH_RIG_TEXT, namesPlaceAndFix } from './helpers.js';
import { applyAll, byteMutation, docMutation } from './mutate.js';

const RIG_RUNS = 8_000;
const CHEMISTRY_RUNS = 4_000;
const CALIBRATION_RUNS = 15_000;
const SCENARIO_RUNS = 2_000;

const config = (p: string): string =>
  readFileSync(fileURLToPath(new URL(`../../config/${p}`, import.meta.url)), 'utf8');

/** Two entries of a shipped YAML file (under `key` when given): a base small enough to mutate quickly. */
function excerpt(text: string, names: string[], key?: string): string {
  const doc = parseYaml(text) as Record<string, Record<string, unknown>>;
  const from = key ? doc[key]! : doc;
  const picked = Object.fromEntries(names.map((n) => [n, from[n]]));
  return toYaml(key ? { [key]: picked } : picked);
}

/** Either the parse succeeds, or it throws the documented error; returns which. */
function outcome(
  run: () => unknown,
  where: string,
  codes: readonly string[],
): 'accepted' | 'refused' {
  try {
    run();
    return 'accepted';
  } catch (e) {
    if (!(e instanceof CellvigilError))
      throw new Error(`a ${(e as Error)?.constructor?.name ?? typeof e} escaped: ${String(e)}`, {
        cause: e,
      });
    if (!codes.includes(e.code))
      throw new Error(`unexpected code ${e.code}: ${e.message}`, { cause: e });
    if (!namesPlaceAndFix(e.message, where))
      throw new Error(`the message does not name the file or say what to do: ${e.message}`, {
        cause: e,
      });
    if (e.exitCode !== 2)
      throw new Error(`a configuration error must exit 2, got ${e.exitCode}`, { cause: e });
    return 'refused';
  }
}

/** A document as YAML or JSON text (JSON is YAML too), from a text mutation or a structural one. */
function mutatedText(base: string, json: boolean): fc.Arbitrary<string> {
  const doc: unknown = json ? JSON.parse(base) : parseYaml(base);
  return fc.oneof(
    fc.array(byteMutation, { minLength: 1, maxLength: 4 }).map((ms) => applyAll(base, ms)),
    fc
      .tuple(fc.array(docMutation, { minLength: 1, maxLength: 4 }), fc.boolean())
      .map(([ms, asJson]) => {
        const d = ms.reduce((x, m) => m(x), doc);
        if (d === undefined) return '';
        return asJson || json ? JSON.stringify(d, null, 1) : toYaml(d);
      }),
  );
}

function tally(): { accepted: number; refused: number; add(r: 'accepted' | 'refused'): void } {
  return {
    accepted: 0,
    refused: 0,
    add(r) {
      this[r]++;
    },
  };
}

describe('rig profiles', () => {
  it(`${RIG_RUNS} mutated profiles: accepted and usable, or refused with CV_CONFIG_INVALID`, () => {
    const where = 'config/rigs/fuzz-case.yaml';
    const t = tally();
    const bases = [BENCH_RIG_TEXT, config('rigs/inverting-10bit.yaml')];
    fc.assert(
      fc.property(fc.oneof(...bases.map((b) => mutatedText(b, false))), (text) => {
        t.add(
          outcome(
            () => {
              const p = parseRigProfile(text, where);
              // An accepted profile must build its chain without any other error.
              new AnalogChain(p);
            },
            where,
            [ErrorCodes.CONFIG_INVALID],
          ),
        );
      }),
      { numRuns: RIG_RUNS },
    );
    console.log(`rig profiles: ${t.accepted} accepted, ${t.refused} refused`);
    expect(t.refused).toBeGreaterThan(0);
    expect(t.accepted).toBeGreaterThan(0);
  });
});

describe('chemistry files', () => {
  it(`${CHEMISTRY_RUNS} mutated chemistry files: accepted or refused with CV_CONFIG_INVALID`, () => {
    const where = '/home/user/cellvigil/chemistries-fuzz.yaml';
    const t = tally();
    fc.assert(
      fc.property(
        mutatedText(excerpt(config('chemistries.yaml'), ['li-ion', 'nimh']), false),
        (text) => {
          t.add(outcome(() => parseChemistries(text, where), where, [ErrorCodes.CONFIG_INVALID]));
        },
      ),
      { numRuns: CHEMISTRY_RUNS },
    );
    console.log(`chemistry files: ${t.accepted} accepted, ${t.refused} refused`);
    expect(t.refused).toBeGreaterThan(0);
    expect(t.accepted).toBeGreaterThan(0);
  });
});

/** A calibration file as `calibrate` writes it (demo points, made up for this input). */
function demoCalibration(): Calibration {
  return sealCalibration({
    format: 1,
    rig: 'bench rig, 20 mΩ shunt',
    date: '2026-01-10T09:00:00Z',
    reference_instrument: 'bench multimeter, 10 A range',
    voltage: fitQuantity(
      'voltage',
      [
        { raw_mean: 1500, nominal: 2.417, reference: 2.409, reference_u: 0.0006 },
        { raw_mean: 2500, nominal: 4.028, reference: 4.015, reference_u: 0.0009 },
      ],
      'gain_offset',
    ).calibration,
    current: fitQuantity(
      'current',
      [
        { raw_mean: 160, nominal: 0.2127, reference: 0.18, reference_u: 0.002 },
        { raw_mean: 800, nominal: 1.0635, reference: 1.0, reference_u: 0.004 },
        { raw_mean: 2400, nominal: 3.1906, reference: 3.02, reference_u: 0.01 },
      ],
      'gain_offset',
    ).calibration,
    temperature: fitQuantity(
      'temperature',
      [{ raw_mean: 2048, nominal: 25.0, reference: 23.8, reference_u: 0.3 }],
      'offset',
    ).calibration,
  });
}

describe('calibration files', () => {
  it(`${CALIBRATION_RUNS} mutated calibrations: accepted or refused with CV_CALIBRATION_INVALID`, () => {
    const where = 'cal/bench-fuzz.json';
    const t = tally();
    const base = JSON.stringify(demoCalibration(), null, 2);
    // Half the structural edits re-seal the id, so they reach the schema rather than the id check.
    const text = fc.oneof(
      mutatedText(base, true),
      fc.array(docMutation, { minLength: 1, maxLength: 3 }).map((ms) => {
        const d = ms.reduce((x, m) => m(x), JSON.parse(base) as unknown);
        if (d !== null && typeof d === 'object' && !Array.isArray(d))
          (d as Record<string, unknown>)['id'] = calibrationId(d as Calibration);
        return JSON.stringify(d) ?? '';
      }),
    );
    fc.assert(
      fc.property(text, (s) => {
        t.add(outcome(() => parseCalibration(s, where), where, [ErrorCodes.CALIBRATION_INVALID]));
      }),
      { numRuns: CALIBRATION_RUNS },
    );
    console.log(`calibration files: ${t.accepted} accepted, ${t.refused} refused`);
    expect(t.refused).toBeGreaterThan(0);
    expect(t.accepted).toBeGreaterThan(0);
  });
});

describe('simulator scenario files', () => {
  const dir = mkdtempSync(join(existsSync('/dev/shm') ? '/dev/shm' : tmpdir(), 'cv-scenarios-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it(`${SCENARIO_RUNS} mutated scenario files: accepted or refused with CV_CONFIG_INVALID`, () => {
    const file = join(dir, 'sim-scenarios.yaml');
    const t = tally();
    fc.assert(
      fc.property(
        mutatedText(excerpt(config('sim-scenarios.yaml'), ['demo', 'quick'], 'scenarios'), false),
        (text) => {
          writeFileSync(file, text);
          t.add(outcome(() => loadScenarios(file), file, [ErrorCodes.CONFIG_INVALID]));
        },
      ),
      { numRuns: SCENARIO_RUNS },
    );
    console.log(`scenario files: ${t.accepted} accepted, ${t.refused} refused`);
    expect(t.refused).toBeGreaterThan(0);
    expect(t.accepted).toBeGreaterThan(0);
  });
});
