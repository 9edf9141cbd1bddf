/**
 * The simulated rig speaking protocol 1.1 line by line, against docs/protocol.md "Version 1.1":
 * the K lines after every hello, each command's acknowledgement, each refusal's E line, the
 * flags of the frames, break-before-make and the heartbeat watchdog over chargers.
 */
import { describe, expect, it } from 'vitest';
import { VirtualClock } from '../../src/core/clock.js';
import { frameState } from '../../src/protocol/frame-state.js';
import { truthSnapshot } from '../../src/sim/sim-port.js';
import { SimRig } from '../../src/sim/sim-rig.js';
import { WATCHDOG_MS } from '../../src/sim/sim-rig.js';
import { BENCH_PROFILE, IdealSource, SCENARIO_FILE } from './helpers.js';
import { buildSimRig, loadScenarios, pickScenario } from '../../src/sim/scenarios.js';
import { raw, rig11, SIM_CC_PROFILE } from './helpers11.js';

describe('simulated rig, protocol 1.1: the hello exchange', () => {
  it('follows every hello, at boot and on request, at once with one K line per channel', () => {
    const r = rig11('cc-quick');
    expect(r.payloads()).toEqual(['H,simrig-c1,sim-1.1,12,1', 'K,0,I,16,3276,0,1']);
    r.clock.advance(250);
    r.send({ command: 'HELLO' });
    expect(r.payloads(2)).toEqual(['H,simrig-c1,sim-1.1,12,1', 'K,0,I,16,3276,0,1']);
  });

  it('a v1 scenario has no K line and answers a 1.1 command with E,SYNTAX', () => {
    const r = rig11('quick');
    expect(r.payloads()).toEqual(['H,simrig-q1,sim-1.0,12,1']);
    r.send(raw('MODE,0,D'));
    expect(r.payloads(1)).toEqual(['E,SYNTAX,field_count']);
  });
});

describe('simulated rig, protocol 1.1: commands and refusals', () => {
  it('MODE D and LOAD 1 before any ISET are refused with E,SETPOINT, and nothing switches', () => {
    const r = rig11('cc-quick');
    r.send(raw('MODE,0,D'));
    r.send({ command: 'LOAD', channel: 0, on: true });
    expect(r.payloads(2)).toEqual([
      'E,SETPOINT,no current set: send ISET before discharging',
      'E,SETPOINT,no current set: send ISET before discharging',
    ]);
    r.clock.advance(500);
    expect(r.frames().every((f) => f.flags === 0)).toBe(true);
    expect(r.rig.modeLog()).toEqual([]);
  });

  it('ISET outside the declared range, a bad mode letter, PSET and a missing channel are refused', () => {
    const r = rig11('cc-quick');
    for (const p of [
      'ISET,0,15',
      'ISET,0,3277',
      'MODE,0,X',
      'PSET,0,100',
      'MODE,3,R',
      'ISET,0,012',
    ])
      r.send(raw(p));
    expect(r.payloads(2)).toEqual([
      'E,RANGE,setpoint outside 16..3276 counts',
      'E,RANGE,setpoint outside 16..3276 counts',
      'E,RANGE,out_of_range',
      'E,CAPABLE,no constant power on this rig: use ISET',
      'E,CHANNEL,no channel 3',
      'E,RANGE,out_of_range',
    ]);
    expect(r.rig.truth11().setpointRaw).toBe(0);
  });

  it('ISET, MODE D, MODE C and LOAD 0 are acknowledged, each change followed by a frame at once', () => {
    const r = rig11('cc-quick');
    r.clock.advance(250);
    const at = r.lines().length;
    r.send(raw('ISET,0,82'));
    r.send(raw('MODE,0,D'));
    r.send(raw('MODE,0,D'));
    r.send(raw('MODE,0,C'));
    r.send({ command: 'LOAD', channel: 0, on: false });
    const said = r.payloads(at).map((p) => (p.startsWith('D,') ? `D…${p.slice(-2)}` : p));
    // 05: load on, constant current; 18: charge, current into the cell; 00: rest.
    expect(said).toEqual([
      'A,ISET,0,82',
      'A,MODE,0,D',
      'D…05',
      'A,MODE,0,D',
      'A,MODE,0,C',
      'D…18',
      'A,LOAD,0,0',
      'D…00',
    ]);
  });

  it('switches break-before-make: the load is off whenever the charger is on', () => {
    const r = rig11('cc-quick');
    r.send(raw('ISET,0,82'));
    r.send(raw('MODE,0,D'));
    r.run(3);
    r.send(raw('MODE,0,C'));
    r.run(3);
    r.send(raw('MODE,0,D'));
    r.run(3);
    expect(r.rig.modeLog().map((m) => m.mode)).toEqual(['discharge', 'charge', 'discharge']);
    expect(r.rig.loadLog().map((s) => s.on)).toEqual([true, false, true]);
    for (const f of r.frames()) {
      const s = frameState(f.flags);
      expect('invalid' in s ? s.invalid : 'ok').toBe('ok');
    }
    const flags = new Set(r.frames().map((f) => f.flags));
    expect([...flags].sort((a, b) => a - b)).toEqual([0x05, 0x18]);
  });

  it('MODE C on a channel without a charger and ISET on a switched load are refused with E,CAPABLE', () => {
    const clock = new VirtualClock();
    const base = {
      clock,
      profile: SIM_CC_PROFILE,
      thermal: {
        ambientC: 25,
        heatCapacityJPerK: 40,
        conductanceWPerK: 0.1,
        loadHeatFraction: 0,
        extraHeatW: 0,
      },
      loadOhm: 3,
      mosfetOhm: 0.01,
      frontEnd: { inputOffsetV: 0, connectionOhm: 0, voltageGainError: 0, noiseCounts: 0 },
      clockError: 0,
      rigId: 'r',
      firmware: 'f',
    };
    const rig = new SimRig({
      ...base,
      channels: [
        {
          channel: 0,
          ...base,
          cell: new IdealSource(3.7),
          constantCurrent: { iMinRaw: 10, iMaxRaw: 2000, trimError: 0, rippleA: 0 },
        },
        {
          channel: 1,
          ...base,
          cell: new IdealSource(3.7),
          charger: { currentA: 0.5, chargeV: 4.2, terminationA: 0.05, heatToCellW: 0 },
        },
      ],
    });
    const chunks: string[] = [];
    rig.start((c) => chunks.push(c));
    rig.receive(raw('MODE,0,C'));
    rig.receive(raw('ISET,1,100'));
    rig.receive(raw('LOAD,1,1'));
    const heard = chunks
      .join('')
      .split('\n')
      .slice(0, -1)
      .map((l) => l.replace(/\|[0-9A-F]{4}$/, ''));
    expect(heard.slice(0, 3)).toEqual(['H,r,f,12,2', 'K,0,I,10,2000,0,0', 'K,1,S,0,0,0,1']);
    expect(heard.slice(3, 6)).toEqual([
      'E,CAPABLE,no charger on channel 0',
      'E,CAPABLE,channel 1 has a switched load: no setpoint',
      // A switched load on a 1.1 rig switches as in v1.
      'A,LOAD,1,1',
    ]);
  });
});

describe('simulated rig, protocol 1.1: the heartbeat watchdog covers chargers', () => {
  it('5 s without a heartbeat while charging: the charger goes off, flag bit 1, E,BEAT_LOST', () => {
    const r = rig11('cc-quick');
    r.send(raw('MODE,0,C'));
    r.run(10);
    const at = r.lines().length;
    r.clock.advance(WATCHDOG_MS + 600);
    expect(r.payloads(at)).toContain('E,BEAT_LOST,no heartbeat for 5 s: every load cut');
    expect(r.rig.modeLog().map((m) => [m.mode, m.cause])).toEqual([
      ['charge', 'host'],
      ['rest', 'watchdog'],
    ]);
    const last = r.frames().at(-1)!;
    expect(last.flags).toBe(0x02);
    expect(r.rig.truth().currentA).toBe(0);
    // The next mode the host asks for clears the fault bit, as LOAD 1 does in v1.
    r.send(raw('MODE,0,C'));
    r.clock.advance(600);
    expect(r.frames().at(-1)!.flags).toBe(0x18);
  });
});

describe('cycling scenarios', () => {
  it('are found by name like the others, kept apart from the v1 scenarios', () => {
    const set = loadScenarios(SCENARIO_FILE);
    expect([...set.cycling.keys()]).toEqual(['cc-quick', 'cc-cycle', 'cc-no-end', 'cc-hot-charge']);
    for (const name of set.cycling.keys()) {
      expect(set.byName.has(name)).toBe(false);
      expect(pickScenario(set, name).charger).toBeDefined();
    }
  });

  it('a charger on a rig profile without a charger monitor is a configuration error', () => {
    const set = loadScenarios(SCENARIO_FILE);
    expect(() =>
      buildSimRig(pickScenario(set, 'cc-quick'), new VirtualClock(), BENCH_PROFILE),
    ).toThrow(expect.objectContaining({ code: 'CV_CONFIG_INVALID' }) as Error);
  });
});

describe('the truth file of a 1.1 rig', () => {
  it('carries the mode, the charge put in and the mode log; a v1 rig’s has none of it', () => {
    const r = rig11('cc-quick');
    r.send(raw('MODE,0,C'));
    r.run(60);
    const snap = truthSnapshot(r.rig, r.clock) as {
      truth11: { mode: string; chargePhase: string; chargedAh: number };
      mode_log: unknown[];
    };
    expect(snap.truth11.mode).toBe('charge');
    expect(snap.truth11.chargePhase).toBe('cc');
    // 25 mA for 60 s is 0.4167 mAh (charge = current × time).
    expect(snap.truth11.chargedAh).toBeCloseTo((0.025 * 60) / 3600, 6);
    expect(snap.mode_log).toEqual([{ atMs: 0, mode: 'charge', cause: 'host' }]);
    expect(truthSnapshot(rig11('quick').rig, new VirtualClock())).not.toHaveProperty('truth11');
  });
});
