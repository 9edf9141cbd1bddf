import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { onlyRunFolder, readJson, startDaemon, startPtyRig, type PtyRig } from './pty-helpers.js';

// Ctrl-C pressed twice in a hurry must still leave the load switched off by the host.
describe('end to end over a pseudo-terminal: SIGINT twice', () => {
  let rig: PtyRig;
  let exitCode: number | null;
  let output = '';
  let result: { end_reason: string; load_off_confirmed: boolean };

  beforeAll(async () => {
    rig = await startPtyRig('demo', ['--seed', '9']);
    const runs = join(rig.dir, 'runs');
    const d = startDaemon([
      '--port',
      rig.hostPath,
      '--chemistry',
      'li-ion',
      '--no-live',
      '--runs',
      runs,
    ]);
    const until = Date.now() + 20_000;
    while (!rig.readTruth().truth.loadOn) {
      if (Date.now() > until) throw new Error(`the load never went on: ${d.stdout()}`);
      await new Promise((r) => setTimeout(r, 100));
    }
    await new Promise((r) => setTimeout(r, 1000));
    d.child.kill('SIGINT');
    // Two signals sent at once are merged by the kernel; the second follows the first closely,
    // landing while the load is being switched off or while the files are written.
    await new Promise((r) => setTimeout(r, 15));
    d.child.kill('SIGINT');
    exitCode = await d.exit;
    output = d.stdout() + d.stderr();
    await new Promise((r) => setTimeout(r, 400));
    result = readJson(join(onlyRunFolder(runs), 'result.json'));
  }, 60_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('exits 0 with the result written as stopped', () => {
    expect(exitCode, output).toBe(0);
    expect(result.end_reason).toBe('stopped');
    // Whether the second signal lands during the stop or after it depends on timing; the
    // in-process test in test/daemon/signals.test.ts pins the first case down.
    expect(output).toMatch(/SIGINT: switching the load off/);
  });

  it('the host switched the load off and the rig confirmed it', () => {
    expect(result.load_off_confirmed).toBe(true);
    const log = rig.readTruth().load_log;
    expect(log.at(-1)).toMatchObject({ on: false, cause: 'host' });
    expect(rig.readTruth().truth.rigFault).toBe(false);
  });
});
