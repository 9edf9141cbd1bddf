import { describe, expect, it } from 'vitest';
import { CommandQueue } from '../../src/program/command-queue.js';
import { countsForAmps } from '../../src/run/program-parts.js';

// docs/protocol.md, "Version 1.1": each command is acknowledged by `A,<command>,<ch>,<arg>`.
describe('the command queue of a program', () => {
  it('sends one command at a time, the next on the acknowledgement of the one before', () => {
    const q = new CommandQueue(1000);
    const sent = q.push(
      [
        { command: 'ISET', channel: 0, raw: 300 },
        { command: 'MODE', channel: 0, mode: 'discharge' },
      ],
      0,
    );
    expect(sent).toEqual([{ command: 'ISET', channel: 0, raw: 300 }]);
    expect(q.ack('ISET', ['0', '299'], 10)).toEqual([]);
    expect(q.ack('ISET', ['0', '300'], 10)).toEqual([
      { command: 'MODE', channel: 0, mode: 'discharge' },
    ]);
    expect(q.ack('MODE', ['0', 'D'], 20)).toEqual([]);
    expect(q.waiting).toBe(0);
  });

  it('sends again after the wait, and after three sends calls the command a fault', () => {
    const q = new CommandQueue(1000, 3);
    q.push([{ command: 'MODE', channel: 0, mode: 'charge' }], 0);
    expect(q.tick(999).resend).toEqual([]);
    expect(q.tick(1000).resend).toHaveLength(1);
    expect(q.tick(2000).resend).toHaveLength(1);
    const last = q.tick(3000);
    expect(last.resend).toEqual([]);
    expect(last.failed).toEqual({ command: 'MODE', channel: 0, mode: 'charge' });
  });
});

// The setpoint is the analog chain inverted (docs/protocol.md: amps -> counts through the
// profile and calibration): with 1 mA a count and a calibration gain of 1.02, 0.51 A is 500 counts.
describe('amps to setpoint counts', () => {
  it('inverts the chain and the calibration to the nearest count', () => {
    const chain = { amps: (raw: number) => raw * 0.001 };
    expect(countsForAmps(chain, { current: (a) => a }, 4095, 0.3)).toBe(300);
    expect(countsForAmps(chain, { current: (a) => a * 1.02 }, 4095, 0.51)).toBe(500);
    expect(countsForAmps(chain, { current: (a) => a }, 4095, 0.3004)).toBe(300);
    expect(countsForAmps(chain, { current: (a) => a }, 4095, 0.3006)).toBe(301);
    expect(countsForAmps(chain, { current: (a) => a }, 4095, 99)).toBe(4095);
  });
});
