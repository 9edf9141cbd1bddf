import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { simulatedBoardCalibration } from './front-end-calibration.js';
import { onlyRunFolder, readJson, startDaemon, startPtyRig, type PtyRig } from './pty-helpers.js';
import {
  isolatedEnv,
  liveUrl,
  runCli,
  runsByCell,
  startStationDaemon,
  until,
  type StationRunFolder,
} from './station-helpers.js';

interface ChannelTruth {
  truth: { chargeAh: number; loadOn: boolean; loadOnS: number };
  load_log: { on: boolean; cause: string }[];
}
const channelTruth = (rig: PtyRig, ch: number): ChannelTruth =>
  readJson<{ channels: Record<string, ChannelTruth> }>(rig.truthPath).channels[ch]!;

/**
 * Two rigs of four channels each over pseudo-terminals (config/sim-scenarios.yaml, rigs quad-a
 * and quad-b), every channel ending for its own reason: rig a at the cutoff (a good and a worn
 * cell), on a broken thermistor and on over-temperature; rig b stopped from the command line,
 * refused at its precheck (a Li-ion cell declared NiMH), at the cutoff, and on a lost link when
 * rig b is unplugged for longer than its link timeout, while rig a runs on.
 */
describe('end to end over pseudo-terminals: a station of two rigs of four channels', () => {
  let a: PtyRig;
  let b: PtyRig;
  let runs: string;
  let byCell: Map<string, StationRunFolder[]>;
  let exitCode: number | null;
  let output = '';
  let stopReply = '';
  let single: { capacity_Ah: number };

  beforeAll(async () => {
    a = await startPtyRig('quad-a');
    b = await startPtyRig('quad-b');
    const dir = a.dir;
    runs = join(dir, 'runs');
    const cal = (scenario: string): string => {
      const path = join(dir, `cal-${scenario}.json`);
      writeFileSync(path, JSON.stringify(simulatedBoardCalibration(scenario)));
      return path;
    };
    const ch = (cell: string, scenario: string | null, chemistry = 'li-ion'): string =>
      `{ chemistry: ${chemistry}, cell_id: ${cell}${scenario ? `, calibration: ${cal(scenario)}` : ''} }`;
    const file = join(dir, 'station.yaml');
    writeFileSync(
      file,
      [
        'runs: runs',
        'listen: 127.0.0.1:0',
        'rigs:',
        '  a:',
        `    port: ${a.hostPath}`,
        '    channels:',
        `      0: ${ch('Q-0', 'quick')}`,
        `      1: ${ch('W-1', 'quick-weak')}`,
        `      2: ${ch('T-2', 'quick-no-ntc')}`,
        `      3: ${ch('H-3', 'hot')}`,
        '  b:',
        `    port: ${b.hostPath}`,
        '    link_timeout_s: 4',
        '    channels:',
        `      0: ${ch('S-0', 'quick-slow')}`,
        `      1: ${ch('N-1', null, 'nimh')}`,
        `      2: ${ch('Q-2', 'quick')}`,
        `      3: ${ch('S-3', 'quick-slow')}`,
        '',
      ].join('\n'),
    );
    const env = isolatedEnv();
    const d = startStationDaemon([file, '--once'], env);
    await until(
      () => liveUrl(d.stdout()) !== null,
      20_000,
      `the live feed: ${d.stdout()}${d.stderr()}`,
    );
    await until(() => channelTruth(b, 0).truth.loadOn, 20_000, 'b/0 to switch on');
    const stop = await runCli(['control', 'b/0', 'stop', '--url', liveUrl(d.stdout())!], env);
    stopReply = stop.output;
    // b/2 (a tiny cell) reaches its cutoff; then rig b is pulled for good: b/3 ends link_lost.
    await until(() => /b\/2: ended/.test(d.stdout()), 90_000, 'b/2 to reach its cutoff');
    await b.unplug();
    exitCode = await d.exit;
    output = d.stdout() + d.stderr();
    byCell = runsByCell(runs);
    // Let the rigs record their last load switches, then power them down while the host end is
    // still read (a rig writing into an unread pseudo-terminal cannot drain it to close).
    await new Promise((r) => setTimeout(r, 500));
    await Promise.all([a.stop(), b.stop()]);

    // The same tiny cell alone on a one-channel rig, with today's `run`.
    const alone = await startPtyRig('quick');
    const aloneRuns = join(alone.dir, 'runs');
    const one = startDaemon([
      '--port',
      alone.hostPath,
      '--chemistry',
      'li-ion',
      '--calibration',
      cal('quick'),
      '--once',
      '--no-live',
      '--runs',
      aloneRuns,
    ]);
    await one.exit;
    await alone.stop();
    single = readJson(join(onlyRunFolder(aloneRuns), 'result.json'));
  }, 240_000);

  afterAll(async () => {
    await a?.stop();
    await b?.stop().catch(() => undefined);
  });

  const only = (cell: string): StationRunFolder => {
    const f = byCell.get(cell);
    if (f?.length !== 1) throw new Error(`expected one run of ${cell}, found ${f?.length ?? 0}`);
    return f[0]!;
  };

  it('each channel ended for its own reason, in its own run folder with its cell id', () => {
    expect(stopReply).toContain('b/0: stop done');
    const ends = Object.fromEntries(
      ['Q-0', 'W-1', 'T-2', 'H-3', 'S-0', 'N-1', 'Q-2', 'S-3'].map((c) => [
        c,
        only(c).result?.end_reason,
      ]),
    );
    expect(ends, output).toEqual({
      'Q-0': 'cutoff',
      'W-1': 'cutoff',
      'T-2': 'fault',
      'H-3': 'over_temperature',
      'S-0': 'stopped',
      'N-1': 'refused',
      'Q-2': 'cutoff',
      'S-3': 'link_lost',
    });
    for (const c of ['Q-0', 'N-1', 'S-3']) expect(only(c).result?.cell_id).toBe(c);
    expect(only('T-2').result?.end_detail).toMatch(/thermistor_open/);
    // A safety limit ended some channels: the station's exit code says so.
    expect(exitCode).toBe(3);
  });

  it('rig b going away ended only its own running channel; rig a ran on', () => {
    const s3 = only('S-3');
    expect(s3.events.map((e) => e.event)).toContain('link_down');
    for (const c of ['Q-0', 'W-1', 'H-3'])
      expect(only(c).events.map((e) => e.event)).not.toContain('link_down');
  });

  it("each channel's capacity matches its cell's true charge (charge = ∫ I dt, physics), and a tiny cell gives on a station what it gives alone", () => {
    for (const [cell, rig, ch] of [
      ['Q-0', a, 0],
      ['W-1', a, 1],
      ['Q-2', b, 2],
    ] as const) {
      const truth = channelTruth(rig, ch).truth;
      const cap = only(cell).result!.capacity_Ah;
      expect(Math.abs(cap - truth.chargeAh) / truth.chargeAh, cell).toBeLessThan(0.01);
    }
    // The worn cell (55 % of the same rating, more resistance) gave much less.
    expect(only('W-1').result!.capacity_Ah / only('Q-0').result!.capacity_Ah).toBeLessThan(0.6);
    // The same cell alone on `run`: equal within 0.5 %, the one-channel end-to-end check's own
    // tolerance against the true charge (where two runs stop at the cutoff differs by a frame or so).
    for (const cell of ['Q-0', 'Q-2']) {
      const cap = only(cell).result!.capacity_Ah;
      expect(Math.abs(cap - single.capacity_Ah) / single.capacity_Ah, cell).toBeLessThan(0.005);
    }
  });

  it('the rigs heard the loads switched per channel: the refused cell was never switched on', () => {
    expect(channelTruth(b, 1).load_log.filter((s) => s.on)).toEqual([]);
    expect(channelTruth(a, 3).load_log.map((s) => [s.on, s.cause])).toEqual([
      [true, 'host'],
      [false, 'host'],
    ]);
  });
});
