import { describe, expect, it } from 'vitest';
import { channelRequest } from '../../src/cli/station-runner.js';
import type { ChannelRunRequest } from '../../src/station/channel-runner.js';
import { parseStationFile } from '../../src/station/station-file.js';
import { StationTimers } from '../../src/station/station-timers.js';

const plan = parseStationFile(
  `rigs:\n  left:\n    port: /dev/ttyUSB0\n    profile: rigs/left.yaml\n    channels:\n      2: { chemistry: nimh, cells: 4, cutoff_V_per_cell: 1.05, calibration: cal/l2.json }\n      3: { chemistry: li-ion, label: batch-7 }\n`,
  '/lab/station.yaml',
);
const rig = plan.rigs[0]!;
const request = (ch: number, o: Partial<ChannelRunRequest> = {}): ChannelRunRequest => ({
  rig,
  plan: rig.channels.find((c) => c.channel === ch)!,
  source: {
    kind: 'serial',
    description: `/dev/ttyUSB0, channel ${ch}`,
    open: async () => undefined,
    write: () => true,
    close: async () => undefined,
  },
  clock: null,
  runs: '/lab/runs',
  resume: null,
  cellId: null,
  hub: null,
  linkTimeoutS: 60,
  timers: new StationTimers(),
  ...o,
});

describe("a station channel's run request", () => {
  it('carries the channel, its cell, limits and files as `run` takes them', () => {
    expect(
      channelRequest(request(2, { cellId: 'NI-7' }), { print: () => undefined }),
    ).toMatchObject({
      port: '/dev/ttyUSB0, channel 2',
      channel: 2,
      chemistry: 'nimh',
      cells: 4,
      cutoff: 1.05,
      calibration: '/lab/cal/l2.json',
      rig: '/lab/rigs/left.yaml',
      cellId: 'NI-7',
      label: 'left-ch2-NI-7',
      listen: null,
      fresh: true,
      runs: '/lab/runs',
    });
  });

  it('a label from the file wins; a resumed run names its folder', () => {
    const r = channelRequest(request(3, { resume: '/lab/runs/x' }), { print: () => undefined });
    expect(r.label).toBe('batch-7');
    expect(r.resume).toBe('/lab/runs/x');
    expect(r.cells).toBeUndefined();
  });
});
