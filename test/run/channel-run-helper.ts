import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { PassThrough } from 'node:stream';
import type { Calibration } from '../../src/calibration/calibration.js';
import { VirtualClock } from '../../src/core/clock.js';
import { ChannelRun } from '../../src/run/channel-run.js';
import { resolveRunConfig } from '../../src/run/run-config.js';
import { StatusPrinter } from '../../src/run/status-line.js';

/** One channel's run on the quick simulated scenario's settings, fed by the test, on a virtual clock. */
export async function channelRun(
  calibration: Calibration | null = null,
): Promise<{ run: ChannelRun; clock: VirtualClock; folder: string }> {
  const folder = mkdtempSync(join(tmpdir(), 'cv-flood-'));
  const cfg = await resolveRunConfig({
    sim: 'quick',
    speed: 1,
    runs: folder,
    listen: null,
    once: true,
    rotateBytes: 1 << 24,
    channel: 0,
    linkTimeoutS: 60,
  });
  cfg.calibration = calibration;
  const clock = new VirtualClock();
  const out = new PassThrough();
  out.resume();
  const run = new ChannelRun({
    cfg,
    channel: 0,
    linkTimeoutS: 60,
    folder,
    rotateBytes: 1 << 24,
    startedWallMs: clock.wallNow(),
    clock,
    resume: null,
    status: new StatusPrinter(out),
    send: () => true,
    stopInputs: async () => undefined,
    releaseLink: async () => undefined,
  });
  return { run, clock, folder };
}
