import { fileURLToPath } from 'node:url';
import { dirname, join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';
import type { CellvigilError } from '../../src/core/errors.js';
import { loadScenarios } from '../../src/sim/scenarios.js';
import { checkStationPlan } from '../../src/station/station-check.js';
import { loadStationFile, parseStationFile } from '../../src/station/station-file.js';

const CONFIG = fileURLToPath(new URL('../../config/', import.meta.url));
const FILE = '/lab/station.yaml';
const chemistries = loadChemistries(join(CONFIG, 'chemistries.yaml'));
const scenarios = loadScenarios(join(CONFIG, 'sim-scenarios.yaml'));

function refused(text: string): CellvigilError {
  try {
    checkStationPlan(parseStationFile(text, FILE), chemistries, scenarios);
  } catch (e) {
    return e as CellvigilError;
  }
  throw new Error('the station file was accepted');
}

const ONE_RIG = (channel: string) =>
  `rigs:\n  bench:\n    port: /dev/ttyUSB0\n    channels:\n      0: ${channel}\n`;

describe('station file', () => {
  it("the shipped demo loads and checks: two simulated rigs, paths from the file's folder, an empty channel", async () => {
    const plan = await loadStationFile(join(CONFIG, 'station-demo.yaml'));
    checkStationPlan(plan, chemistries, scenarios);
    expect(plan.rigs.map((r) => [r.name, r.link])).toEqual([
      ['left', { kind: 'sim', name: 'station-a' }],
      ['right', { kind: 'sim', name: 'station-b' }],
    ]);
    expect(plan.rigs[0]!.profile).toBe(join(CONFIG, 'rigs/bench-20mohm.yaml'));
    expect(plan.rigs[0]!.channels.map((c) => c.cellId)).toEqual([
      'A-001',
      'A-002',
      'A-003',
      'A-004',
    ]);
    expect(plan.rigs[1]!.channels.map((c) => c.channel)).toEqual([0, 1, 2]);
    expect(plan.rigs[1]!.empty).toEqual([3]);
    expect(plan.runs).toBeNull();
  });

  it('keeps channel settings and resolves relative files; a cell id is what is written on the cell', () => {
    const plan = parseStationFile(
      `runs: ../runs\nlisten: off\nrigs:\n  b1:\n    port: ptys/b1\n    baud: 57600\n    link_timeout_s: 20\n    channels:\n      3: { chemistry: nimh, cells: 4, cutoff_V_per_cell: 1.05, label: pack, cell_id: "ENL/2019:07", calibration: cal/b1-3.json, schedule: "on 15 s every 1 min" }\n`,
      FILE,
    );
    expect(plan.runs).toBe('/runs');
    expect(plan.listen).toBeNull();
    expect(plan.rigs[0]).toEqual({
      name: 'b1',
      link: { kind: 'port', path: '/lab/ptys/b1' },
      profile: null,
      baud: 57600,
      linkTimeoutS: 20,
      empty: [],
      channels: [
        {
          rig: 'b1',
          channel: 3,
          chemistry: 'nimh',
          cells: 4,
          cutoffVPerCell: 1.05,
          label: 'pack',
          cellId: 'ENL/2019:07',
          calibration: '/lab/cal/b1-3.json',
          schedule: 'on 15 s every 1 min',
        },
      ],
    });
  });

  it('a misspelt key names the file, the key and the keys allowed', () => {
    const e = refused(ONE_RIG('{ chemistry: li-ion, cutof_V_per_cell: 3.0 }'));
    expect(e.code).toBe('CV_CONFIG_INVALID');
    expect(e.exitCode).toBe(2);
    expect(e.message).toContain(`${FILE}, key rigs.bench.channels.0.cutof_V_per_cell`);
    expect(e.message).toContain('cutoff_V_per_cell, label, cell_id');
  });

  it('a rig needs exactly one of port and sim', () => {
    for (const link of ['', '    port: /dev/ttyUSB0\n    sim: quad-a\n']) {
      const e = refused(`rigs:\n  bench:\n${link}    channels:\n      0: { chemistry: li-ion }\n`);
      expect(e.message).toMatch(/rig bench needs exactly one of "port".*"sim".*key rigs\.bench\)/);
    }
  });

  it('a channel is `empty` or its settings; a typo of empty is named as such', () => {
    const e = refused(ONE_RIG('emtpy'));
    expect(e.message).toContain('channel 0 of rig bench is "emtpy"');
    expect(e.message).toContain('Write `empty`');
  });

  it('channels are 0 to 15, as protocol v1 carries them', () => {
    const e = refused(
      `rigs:\n  bench:\n    port: /dev/ttyUSB0\n    channels:\n      16: { chemistry: li-ion }\n`,
    );
    expect(e.message).toMatch(/key rigs\.bench\.channels\).*channels are 0 to 15/);
  });

  it('a cell id the registry could not file is refused here, with its key (a space, a line break)', () => {
    for (const id of ['"A 1"', '"A\\n1"', '"-A1"']) {
      const e = refused(ONE_RIG(`{ chemistry: li-ion, cell_id: ${id} }`));
      expect(e.message).toContain('key rigs.bench.channels.0.cell_id');
      expect(e.message).toContain('a cell id is 1 to 64 letters, digits or . _ : / -');
    }
  });

  it('two rigs on one port are refused', () => {
    const e = refused(
      `rigs:\n  a:\n    port: /dev/ttyUSB0\n    channels: { 0: { chemistry: li-ion } }\n  b:\n    port: /dev/ttyUSB0\n    channels: { 1: { chemistry: li-ion } }\n`,
    );
    expect(e.message).toContain('rigs "a" and "b" are both on /dev/ttyUSB0');
    expect(e.message).toContain('key rigs.b.port');
  });

  it("a cutoff below the chemistry's floor is refused with its key: Li-ion floor 2.5 V per cell (common practice)", () => {
    const e = refused(ONE_RIG('{ chemistry: li-ion, cutoff_V_per_cell: 2.4 }'));
    expect(e.code).toBe('CV_CUTOFF_BELOW_FLOOR');
    expect(e.message).toContain('key rigs.bench.channels.0.cutoff_V_per_cell');
    expect(e.message).toContain('floor of 2.50 V per cell');
    expect(() =>
      checkStationPlan(
        parseStationFile(ONE_RIG('{ chemistry: li-ion, cutoff_V_per_cell: 2.5 }'), FILE),
        chemistries,
        scenarios,
      ),
    ).not.toThrow();
  });

  it('an unknown chemistry, a simulated rig without that channel, and an unknown simulated rig are named', () => {
    expect(refused(ONE_RIG('{ chemistry: li-po }')).message).toMatch(
      /Unknown chemistry "li-po".*key rigs\.bench\.channels\.0\.chemistry.*li-ion/,
    );
    const sim = (name: string, ch: number) =>
      `rigs:\n  s:\n    sim: ${name}\n    channels:\n      ${ch}: { chemistry: li-ion }\n`;
    expect(refused(sim('quad-a', 5)).message).toMatch(
      /has no channel 5.*key rigs\.s\.channels\.5.*0, 1, 2, 3/,
    );
    expect(refused(sim('quad-z', 0)).message).toMatch(
      /no simulated rig or scenario "quad-z".*key rigs\.s\.sim/,
    );
  });

  it('YAML that does not parse names the file', () => {
    const e = refused('rigs: [\n');
    expect(e.code).toBe('CV_CONFIG_INVALID');
    expect(e.message).toContain(FILE);
    expect(dirname(FILE)).toBe('/lab');
  });
});
