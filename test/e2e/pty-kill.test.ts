import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startDaemon, startPtyRig, type PtyRig } from './pty-helpers.js';

// Protocol v1: a rig that hears no heartbeat for 5 s switches every load off by itself.
describe('end to end over a pseudo-terminal: the daemon killed with SIGKILL', () => {
  let rig: PtyRig;
  let killedAtMs: number;

  beforeAll(async () => {
    rig = await startPtyRig('demo', ['--seed', '5']);
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
    // Wait until the load is on, run a moment, then kill the daemon without warning.
    const until = Date.now() + 20_000;
    while (!rig.readTruth().truth.loadOn) {
      if (Date.now() > until)
        throw new Error(`the load never went on: ${d.stdout()} ${d.stderr()}`);
      await new Promise((r) => setTimeout(r, 100));
    }
    await new Promise((r) => setTimeout(r, 1500));
    killedAtMs = rig.readTruth().clock_ms;
    d.child.kill('SIGKILL');
    await d.exit;
    await new Promise((r) => setTimeout(r, 6500));
  }, 60_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('the simulated rig cuts its own load within 5 s of the last heartbeat', () => {
    const t = rig.readTruth();
    expect(t.truth.loadOn).toBe(false);
    expect(t.truth.rigFault).toBe(true);
    const cut = t.load_log.at(-1)!;
    expect(cut).toMatchObject({ on: false, cause: 'watchdog' });
    // The truth file is written every 250 ms, so the kill is known to within that.
    expect(cut.atMs - killedAtMs).toBeLessThan(5000 + 300);
    expect(cut.atMs - killedAtMs).toBeGreaterThan(4000);
  });
});
