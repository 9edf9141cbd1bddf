/**
 * Broken configuration files, one concrete mistake at a time: the message names the file, the
 * key (or the line, for a syntax error), and says what to do.
 */
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { parse as parseYaml, stringify as toYaml } from 'yaml';
import { fitQuantity, sealCalibration } from '../../src/calibration/calibration.js';
import { parseCalibration } from '../../src/calibration/calibration-file.js';
import { parseRigProfile } from '../../src/chain/rig-profile-file.js';
import { parseChemistries } from '../../src/chemistry/chemistry-file.js';
import { CellvigilError, ErrorCodes, type ErrorCode } from '../../src/core/errors.js';
import { BENCH_RIG_TEXT, namesPlaceAndFix } from './helpers.js';

/** A broken input and what its message must contain (a key, a line, "empty"). */
type Case = [name: string, text: string, mentions: string[]];

function refusal(parse: () => unknown): CellvigilError {
  try {
    parse();
  } catch (e) {
    expect(e).toBeInstanceOf(CellvigilError);
    return e as CellvigilError;
  }
  throw new Error('the file was accepted');
}

function table(
  where: string,
  code: ErrorCode,
  parse: (text: string) => unknown,
  cases: Case[],
): void {
  for (const [name, text, mentions] of cases) {
    it(`${name}: names ${where}, ${mentions.join(' and ')}, and the fix`, () => {
      const e = refusal(() => parse(text));
      expect(e.code).toBe(code);
      expect(e.exitCode).toBe(2);
      for (const m of mentions) expect(e.message).toContain(m);
      expect(namesPlaceAndFix(e.message, where), e.message).toBe(true);
    });
  }
}

describe('rig profile messages', () => {
  const where = 'config/rigs/my-board.yaml';
  const rig = BENCH_RIG_TEXT;
  table(where, ErrorCodes.CONFIG_INVALID, (t) => parseRigProfile(t, where), [
    ['missing key', rig.replace(/^frame:.*$/m, ''), ['frame is missing', 'Add frame']],
    ['missing nested key', rig.replace('shunt_ohm: 0.020, ', ''), ['current.shunt_ohm is missing']],
    [
      'wrong type',
      rig.replace('bits: 12', 'bits: twelve'),
      ['adc.bits must be a whole number', 'got "twelve"', 'Set adc.bits'],
    ],
    ['number in quotes', rig.replace('bits: 12', 'bits: "12"'), ['adc.bits', 'got "12"']],
    [
      'unknown key',
      rig.replace('bits: 12', 'bits: 12, bitz: 3'),
      ['adc.bitz is not a known key', 'Remove adc.bitz'],
    ],
    [
      'out of range',
      rig.replace('bits: 12', 'bits: 32'),
      ['adc.bits must be from 8 to 24', 'got 32'],
    ],
    [
      'negative shunt',
      rig.replace('shunt_ohm: 0.020', 'shunt_ohm: -0.02'),
      ['current.shunt_ohm must be a number > 0'],
    ],
    [
      'both amplifier forms',
      rig.replace('amplifier_gain: 30.30', 'amplifier_gain: 30.30, rin_ohm: 330, rf_ohm: 10000'),
      ['current must give either amplifier_gain', 'Use amplifier_gain'],
    ],
    [
      'YAML syntax error',
      rig.replace('{ bits: 12,', '{ bits: 12,,'),
      ['not valid YAML', 'line 4', 'Fix the YAML syntax'],
    ],
    ['empty file', '', ['the file is empty']],
    ['only comments', '# my board\n', ['the file is empty']],
  ]);
});

const chemistryText = ((): string => {
  const shipped = readFileSync(
    fileURLToPath(new URL('../../config/chemistries.yaml', import.meta.url)),
    'utf8',
  );
  return toYaml({ 'li-ion': (parseYaml(shipped) as Record<string, unknown>)['li-ion'] });
})();

describe('chemistry file messages', () => {
  const where = '/home/me/chemistries.yaml';
  const chem = chemistryText;
  it('the base text is a valid chemistry file', () => {
    expect(parseChemistries(chem, where)).toHaveLength(1);
  });
  table(where, ErrorCodes.CONFIG_INVALID, (t) => parseChemistries(t, where), [
    [
      'missing key',
      chem.replace(/ {2}floor_V_per_cell:\n {4}value: 2.5\n {4}source: common practice\n/, ''),
      ['li-ion.floor_V_per_cell is missing'],
    ],
    [
      'missing source',
      chem.replace(/(floor_V_per_cell:\n {4}value: 2.5\n) {4}source: common practice\n/, '$1'),
      ['li-ion.floor_V_per_cell.source is missing', 'every value needs a source'],
    ],
    [
      'wrong type',
      chem.replace('value: 2.5', 'value: two'),
      ['li-ion.floor_V_per_cell.value must be a finite number'],
    ],
    [
      'unknown key',
      chem.replace('  name:', '  colour: red\n  name:'),
      ['li-ion.colour is not a known key'],
    ],
    [
      'out of range',
      chem.replace('value: 60', 'value: 160'),
      ['li-ion.max_temperature_C.value (160 °C) must be above 0 and at most 100'],
    ],
    [
      'floor above the cutoff',
      chem.replace('value: 2.5', 'value: 3.1'),
      ['li-ion.floor_V_per_cell.value (3.1 V) must not be above cutoff_V_per_cell'],
    ],
    ['invalid id', chem.replace('li-ion:', 'Li Ion:'), ['Li Ion is not a valid chemistry id']],
    [
      'YAML syntax error',
      chem.replace('value: 2.5', 'value: [2.5'),
      ['not valid YAML', 'line ', 'Fix the YAML syntax'],
    ],
    ['empty file', '', ['(top level) is empty']],
  ]);
});

const calibrationText = JSON.stringify(
  sealCalibration({
    format: 1,
    rig: 'bench rig, 20 mΩ shunt',
    date: '2026-01-10T09:00:00Z',
    reference_instrument: 'bench multimeter, 20 V range',
    voltage: fitQuantity(
      'voltage',
      [
        { raw_mean: 1500, nominal: 2.417, reference: 2.409, reference_u: 0.0006 },
        { raw_mean: 2500, nominal: 4.028, reference: 4.015, reference_u: 0.0009 },
      ],
      'gain_offset',
    ).calibration,
  }),
  null,
  2,
);

// Free-form edits of parsed JSON: the tests reach into any key.
// eslint-disable-next-line @typescript-eslint/no-explicit-any
type LooseJson = Record<string, any>;

function editCal(f: (c: LooseJson) => void): string {
  const c = JSON.parse(calibrationText) as LooseJson;
  f(c);
  return JSON.stringify(c, null, 2);
}

describe('calibration file messages', () => {
  const where = 'cal/bench-20mohm.json';
  it('the base text is a valid calibration file', () => {
    expect(parseCalibration(calibrationText, where).voltage?.fit.model).toBe('gain_offset');
  });
  table(where, ErrorCodes.CALIBRATION_INVALID, (t) => parseCalibration(t, where), [
    ['missing key', editCal((c) => delete c['rig']), ["required property 'rig'"]],
    [
      'missing nested key',
      editCal((c) => delete c['voltage'].fit.gain),
      ["voltage.fit must have required property 'gain'"],
    ],
    [
      'wrong type',
      editCal((c) => (c['voltage'].fit.gain = '1.0')),
      ['voltage.fit.gain must be number, got "1.0"'],
    ],
    [
      'unknown key',
      editCal((c) => (c['voltage'].fit.slope = 1)),
      ['voltage.fit must NOT have additional properties (slope)'],
    ],
    [
      'out of range',
      editCal((c) => (c['voltage'].fit.gain = -1)),
      ['voltage.fit.gain must be > 0, got -1'],
    ],
    ['wrong format', editCal((c) => (c['format'] = 2)), ['format must be 1, got 2']],
    [
      'unknown model',
      editCal((c) => (c['voltage'].fit.model = 'quadratic')),
      ['voltage.fit.model must be one of "gain_offset", "offset", got "quadratic"'],
    ],
    [
      'edited after writing',
      editCal((c) => (c['voltage'].fit.offset = 0.5)),
      ['does not match', 'set "id" to'],
    ],
    [
      'JSON syntax error',
      calibrationText.replace('"rig"', 'rig'),
      ['not valid JSON', 'line 4, column 3'],
    ],
    ['empty file', '', ['the calibration file is empty']],
  ]);
});
