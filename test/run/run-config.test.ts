import { describe, expect, it } from 'vitest';
import type { RunManifest } from '../../src/record/manifest.js';
import { resolveRunConfig } from '../../src/run/run-config.js';
import type { RunRequest } from '../../src/run/run-request.js';
import { manifestOf } from '../../src/run/start-report.js';
import { SimSource } from '../../src/sources/sim-source.js';
import { VirtualClock } from '../../src/core/clock.js';

function request(over: Partial<RunRequest> = {}): RunRequest {
  return {
    sim: 'nimh',
    speed: 1,
    runs: 'runs',
    listen: null,
    once: true,
    rotateBytes: 1 << 24,
    linkTimeoutS: 60,
    channel: 0,
    ...over,
  };
}

// NiMH end of discharge 1.0 V per cell (IEC 61951-2, from memory); a schedule's "to … V" is the
// same quantity as --cutoff, so two different ones cannot both hold.
describe('the run configuration', () => {
  it('refuses a schedule ending "to 1.1 V" with --cutoff 1.05 instead of letting one lose silently', async () => {
    await expect(
      resolveRunConfig(request({ schedule: 'on 15 s every 1 min, to 1.1 V', cutoff: 1.05 })),
    ).rejects.toMatchObject({
      code: 'CV_USAGE',
      message: expect.stringMatching(/schedule ends at 1\.1 V per cell .* --cutoff says 1\.05 V/),
    });
    const same = await resolveRunConfig(
      request({ schedule: 'on 15 s every 1 min, to 1.1 V', cutoff: 1.1 }),
    );
    expect(same.cutoff.perCell).toBe(1.1);
    const fromSchedule = await resolveRunConfig(
      request({ schedule: 'on 15 s every 1 min, to 1.1 V' }),
    );
    expect(fromSchedule.cutoff).toMatchObject({
      perCell: 1.1,
      source: "user (the schedule's end point)",
    });
  });

  it('a resumed run keeps where its cutoff came from (not "user (--cutoff)" when none was given)', async () => {
    const cfg = await resolveRunConfig(request());
    expect(cfg.cutoff.source).not.toMatch(/user/);
    const clock = new VirtualClock(0, Date.UTC(2026, 11, 3));
    const manifest: RunManifest = manifestOf({
      req: request(),
      cfg,
      label: 'resume-me',
      startedWallMs: Date.UTC(2026, 11, 3),
      source: new SimSource({ scenario: cfg.scenario!, clock, profile: cfg.profile }),
      calibrationId: 'none',
    });
    const resumed = await resolveRunConfig(request({ resume: 'runs/x' }), manifest);
    expect(resumed.cutoff.source).toBe(cfg.cutoff.source);
    expect(resumed.cutoff.perCell).toBe(cfg.cutoff.perCell);
  });
});
