import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulatedBoardCalibration } from './front-end-calibration.js';
import { readJson, startPtyRig, type PtyRig } from './pty-helpers.js';
import {
  isolatedEnv,
  runsByCell,
  startStationDaemon,
  until,
  type StationRunFolder,
} from './station-helpers.js';

interface ChannelTruth {
  truth: { chargeAh: number; loadOn: boolean };
  load_log: { on: boolean; cause: string }[];
}

/**
 * The whole station dies by SIGKILL mid-discharge; the rig's watchdog cuts every load; the
 * station is started again with the same file and brings every unfinished channel back, each
 * from its own folder and through its precheck again.
 */
describe('end to end over a pseudo-terminal: SIGKILL of a station and its resume', () => {
  let rig: PtyRig;
  let byCell: Map<string, StationRunFolder[]>;
  let exitCode: number | null;
  let output = '';

  beforeAll(async () => {
    rig = await startPtyRig('quad-a');
    const dir = rig.dir;
    const cal = (scenario: string): string => {
      const path = join(dir, `cal-${scenario}.json`);
      writeFileSync(path, JSON.stringify(simulatedBoardCalibration(scenario)));
      return path;
    };
    const file = join(dir, 'station.yaml');
    writeFileSync(
      file,
      [
        'runs: runs',
        'listen: off',
        'rigs:',
        '  a:',
        `    port: ${rig.hostPath}`,
        '    channels:',
        `      0: { chemistry: li-ion, cell_id: Q-0, calibration: ${cal('quick')} }`,
        `      1: { chemistry: li-ion, cell_id: W-1, calibration: ${cal('quick-weak')} }`,
        `      3: { chemistry: li-ion, cell_id: H-3, calibration: ${cal('hot')} }`,
        '',
      ].join('\n'),
    );
    const env = isolatedEnv();
    const truth = (ch: number): ChannelTruth =>
      readJson<{ channels: Record<string, ChannelTruth> }>(rig.truthPath).channels[ch]!;
    const first = startStationDaemon([file, '--once'], env);
    await until(() => [0, 1, 3].every((ch) => truth(ch).truth.loadOn), 20_000, 'every load on');
    await new Promise((r) => setTimeout(r, 4000));
    first.child.kill('SIGKILL');
    await first.exit;
    // Long enough for the rig's watchdog (5 s) to cut every load.
    await new Promise((r) => setTimeout(r, 6500));
    const second = startStationDaemon([file, '--once'], env);
    exitCode = await second.exit;
    output = second.stdout() + second.stderr();
    byCell = runsByCell(join(dir, 'runs'));
  }, 150_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('every channel was resumed in its own folder and ended for its own reason', () => {
    const ends = Object.fromEntries(
      ['Q-0', 'W-1', 'H-3'].map((c) => {
        const runs = byCell.get(c) ?? [];
        expect(runs, `${c}: ${output}`).toHaveLength(1);
        return [c, runs[0]!.result?.end_reason];
      }),
    );
    expect(ends, output).toEqual({ 'Q-0': 'cutoff', 'W-1': 'cutoff', 'H-3': 'over_temperature' });
    expect(exitCode).toBe(3);
  });

  it('each went through its precheck again before its load went back on', () => {
    for (const c of ['Q-0', 'W-1', 'H-3']) {
      const events = byCell.get(c)![0]!.events.map((e) => e.event);
      const resumed = events.indexOf('resumed');
      expect(resumed, c).toBeGreaterThan(0);
      expect(events.indexOf('precheck_passed', resumed), c).toBeGreaterThan(resumed);
    }
  });

  it('the rig saw every load cut by its watchdog, then switched on again by the host', () => {
    for (const ch of [0, 1, 3]) {
      const log = readJson<{ channels: Record<string, ChannelTruth> }>(rig.truthPath).channels[ch]!
        .load_log;
      expect(
        log.slice(0, 3).map((s) => [s.on, s.cause]),
        `channel ${ch}`,
      ).toEqual([
        [true, 'host'],
        [false, 'watchdog'],
        [true, 'host'],
      ]);
    }
  });
});
