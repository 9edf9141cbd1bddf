import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { VirtualClock } from '../../src/core/clock.js';
import type { CellvigilError } from '../../src/core/errors.js';
import { decodeRigLine } from '../../src/protocol/codec.js';
import {
  buildSimRig,
  loadScenarios,
  pickScenario,
  type SimOverrides,
} from '../../src/sim/scenarios.js';
import { BENCH_PROFILE, harness, SCENARIO_FILE } from './helpers.js';

const set = loadScenarios(SCENARIO_FILE);

function run(name: string, overrides: SimOverrides = {}) {
  const clock = new VirtualClock();
  const h = harness(buildSimRig(pickScenario(set, name), clock, BENCH_PROFILE, overrides), clock);
  h.send({ command: 'LOAD', channel: 0, on: true });
  /** Advances with a BEAT every second until `until` holds or `maxS` passes; returns sim seconds. */
  const until = (stop: () => boolean, maxS: number): number => {
    for (let s = 1; s <= maxS; s++) {
      clock.advance(1000);
      h.send({ command: 'BEAT' });
      if (stop()) return s;
    }
    return Infinity;
  };
  return { h, clock, until };
}

describe('scenarios', () => {
  it('the shipped file loads: demo, quick, hot and nimh', () => {
    expect([...set.byName.keys()]).toEqual(
      expect.arrayContaining(['demo', 'quick', 'hot', 'nimh']),
    );
    expect(pickScenario(set, 'demo').rig.channel).toBe(0);
    expect(pickScenario(set, 'quick').thermal.extra_heat_W).toBe(0);
    expect(() => pickScenario(set, 'nope')).toThrow(
      /no simulator scenario "nope".*Use one of: demo/,
    );
  });

  it('demo: about 1.2 A through the 20 mΩ rig, with the set offset, gain error and a fast clock', () => {
    const { h, clock } = run('demo', { dropProbability: 0, garbageProbability: 0 });
    h.send({ command: 'BEAT' });
    clock.advance(3000);
    const t = h.rig.truth();
    expect(t.currentA).toBeGreaterThan(1.1);
    expect(t.currentA).toBeLessThan(1.5);
    const frames = h.lines().flatMap((l) => {
      const r = decodeRigLine(l, 12);
      return r.ok && r.message.kind === 'data' ? [r.message] : [];
    });
    // Nominal conversion of the current channel reads high by the 4 % gain error plus the 30 mA offset.
    const amps = (c: number) => ((c + 0.5) * 3.3) / 4096 / (30.3 * 0.02);
    const mean = frames.slice(-10).reduce((s, f) => s + amps(f.iRaw), 0) / 10;
    expect(mean).toBeCloseTo(t.currentA * 1.04 + 0.03, 2);
    const first = frames[0]!;
    const last = frames.at(-1)!;
    expect((last.tickMs - first.tickMs) / ((last.seq - first.seq) * (100 / 1.12))).toBeCloseTo(
      1.12,
      2,
    );
  });

  it('quick: reaches 3.0 V under load in 20–40 s of time (the real-time end-to-end budget)', () => {
    const { h, until } = run('quick');
    const s = until(() => h.rig.truth().terminalV < 3.0, 120);
    expect(s).toBeGreaterThanOrEqual(20);
    expect(s).toBeLessThanOrEqual(40);
    expect(h.rig.truth().chargeAh * 1000).toBeGreaterThan(7);
  });

  it('hot: the cell passes 60 °C within 15–30 s of sim time, and cools once the load is off', () => {
    const { h, clock, until } = run('hot');
    const s = until(() => h.rig.truth().temperatureC > 60, 120);
    expect(s).toBeGreaterThanOrEqual(15);
    expect(s).toBeLessThanOrEqual(30);
    h.send({ command: 'LOAD', channel: 0, on: false });
    const hot = h.rig.truth().temperatureC;
    clock.advance(30_000);
    expect(h.rig.truth().temperatureC).toBeLessThan(hot);
  });

  it('nimh: a 1.9 Ah AA cell gives close to its capacity down to 1.0 V under load', () => {
    const { h, until } = run('nimh');
    const s = until(() => h.rig.truth().terminalV < 1.0, 6 * 3600);
    const t = h.rig.truth();
    expect(s).toBeLessThan(5 * 3600);
    expect(t.chargeAh).toBeGreaterThan(1.8);
    expect(t.chargeAh).toBeLessThan(1.9);
    expect(t.currentA).toBeGreaterThan(0.35);
  });

  it('overrides change clock error, burst size, fault rates and seed', () => {
    const { h, clock } = run('demo', {
      clockError: 0.2,
      burstFrames: 4,
      dropProbability: 0.5,
      garbageProbability: 0,
      seed: 3,
    });
    h.send({ command: 'BEAT' });
    clock.advance(4010);
    const t = h.rig.truth();
    expect(t.framesDropped).toBeGreaterThan(10);
    expect(t.garbageLines).toBe(0);
    expect(t.framesSent + t.framesDropped).toBe(48); // 4 s at 100 rig ms per frame, 20 % fast
  });
});

describe('scenario file validation', () => {
  const dir = mkdtempSync(join(tmpdir(), 'cv-sim-'));
  const shipped = readFileSync(SCENARIO_FILE, 'utf8');
  const load = (text: string): CellvigilError => {
    const file = join(dir, 'bad.yaml');
    writeFileSync(file, text);
    try {
      loadScenarios(file);
    } catch (e) {
      return e as CellvigilError;
    }
    throw new Error('expected the file to be rejected');
  };

  it('names the file, the key and the fix', () => {
    const e = load(shipped.replace('capacity_Ah: 2.6', 'capacity_Ah: -2.6'));
    expect(e.code).toBe('CV_CONFIG_INVALID');
    expect(e.exitCode).toBe(2);
    expect(e.message).toContain('bad.yaml, key scenarios.demo.cell.capacity_Ah');
    expect(e.message).toContain('Use a value > 0');
  });

  it('a misspelt key is refused, listing the keys allowed', () => {
    const e = load(shipped.replace('load_ohm: 3.0', 'load_ohms: 3.0'));
    expect(e.message).toMatch(/key scenarios\.demo\.load\.(load_ohms|load_ohm)/);
    expect(e.message).toMatch(
      /Remove or rename "load_ohms"; the keys allowed here are: load_ohm, mosfet_ohm|Add the key "load_ohm"/,
    );
  });

  it('an unknown chemistry lists the known ones', () => {
    const e = load(shipped.replace('chemistry: nimh', 'chemistry: nimhh'));
    expect(e.message).toContain('key scenarios.nimh.cell.chemistry');
    expect(e.message).toContain('Use one of: alkaline, nimh, nicd, li-ion, lifepo4, lead-acid');
  });

  it('the current offset must be given exactly once, in amps or in volts', () => {
    const e = load(
      shipped.replace(
        'current_offset_A: 0.030,',
        'current_offset_A: 0.030, current_offset_V: 0.0006,',
      ),
    );
    expect(e.message).toContain('key scenarios.demo.front_end');
    expect(e.message).toContain('Give exactly one of: current_offset_A, current_offset_V');
  });

  it('a missing key, bad YAML and a missing file are reported clearly', () => {
    const noFaults = load(shipped.replace(/^ {4}faults: .*seed: 8 }\n/m, '')).message;
    expect(noFaults).toContain('key scenarios.quick.faults');
    expect(noFaults).toContain('Add the key "faults"');
    expect(load('scenarios: [\n').message).toMatch(/not valid YAML.*bad\.yaml/s);
    const missing = (() => {
      try {
        loadScenarios(join(dir, 'absent.yaml'));
      } catch (e) {
        return e as CellvigilError;
      }
      throw new Error('expected a read error');
    })();
    expect(missing.code).toBe('CV_CONFIG_READ');
    expect(missing.message).toContain('absent.yaml');
  });
});
