import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { PassThrough } from 'node:stream';
import { describe, expect, it } from 'vitest';
import { startRun } from '../../src/run/daemon.js';
import type { SimSource } from '../../src/sources/sim-source.js';

describe('a second SIGINT while the load is being switched off', () => {
  it('does not skip the load-off: one stop, confirmed by the rig, result written as stopped', async () => {
    const out = new PassThrough();
    let text = '';
    out.on('data', (d: Buffer) => (text += d.toString()));
    const run = await startRun(
      {
        sim: 'demo',
        speed: 1,
        runs: mkdtempSync(join(tmpdir(), 'cv-sig-')),
        listen: null,
        once: true,
        rotateBytes: 1 << 24,
        channel: 0,
        linkTimeoutS: 60,
      },
      { out, err: out, signals: true },
    );
    const rig = (run.source as SimSource).rig;
    while (!rig.truth().loadOn) await new Promise((r) => setTimeout(r, 20));
    // Both signals arrive before the rig has heard anything: the second finds the run stopping.
    process.emit('SIGINT', 'SIGINT');
    process.emit('SIGINT', 'SIGINT');
    const outcome = await run.done;
    expect(text).toMatch(/SIGINT again: the load is being switched off first/);
    expect(outcome.exitCode).toBe(0);
    expect(outcome.result.end_reason).toBe('stopped');
    expect(outcome.result.load_off_confirmed).toBe(true);
    expect(rig.loadLog().map((s) => [s.on, s.cause])).toEqual([
      [true, 'host'],
      [false, 'host'],
    ]);
  }, 30_000);
});
