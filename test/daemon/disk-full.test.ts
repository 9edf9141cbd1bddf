import { execFileSync } from 'node:child_process';
import { mkdirSync, mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startRun } from '../../src/run/daemon.js';
import type { SimSource } from '../../src/sources/sim-source.js';
import { quietIo } from './quiet-io.js';

// A tiny tmpfs needs root; CI runs as root, so there the test must run, not skip.
const root = process.getuid?.() === 0;
const mounts: string[] = [];

function mountTmpfs(options: string): string {
  const dir = mkdtempSync(join(tmpdir(), 'cv-mnt-'));
  execFileSync('mount', ['-t', 'tmpfs', '-o', options, 'tmpfs', dir]);
  mounts.push(dir);
  return dir;
}

describe.skipIf(!root && !process.env['CI'])('a run folder that cannot be written', () => {
  beforeAll(() => {
    expect(root, 'these tests mount a tmpfs and need root').toBe(true);
  });
  afterAll(() => {
    for (const m of mounts) execFileSync('umount', ['-l', m]);
  });

  it('a full disk: clear error, the load switched off on the rig, exit 1', async () => {
    const runs = mountTmpfs('size=96k');
    const out = quietIo();
    const run = await startRun(
      {
        sim: 'demo',
        speed: 100,
        runs,
        listen: null,
        once: true,
        rotateBytes: 1 << 24,
        channel: 0,
        linkTimeoutS: 60,
      },
      out,
    );
    const outcome = await run.done;
    expect(outcome.exitCode).toBe(1);
    expect(out.text()).toMatch(/CV_RUN_FOLDER/);
    expect(out.text()).toMatch(/ENOSPC|no space/i);
    const log = (run.source as SimSource).rig.loadLog();
    expect(log.length).toBeGreaterThanOrEqual(2);
    expect(log.at(-1)).toMatchObject({ on: false, cause: 'host' });
  });

  it('a read-only folder: clear error before anything is switched on, exit 1', async () => {
    const ro = mountTmpfs('size=64k');
    mkdirSync(join(ro, 'runs'));
    execFileSync('mount', ['-o', 'remount,ro', ro]);
    await expect(
      startRun(
        {
          sim: 'demo',
          speed: 100,
          runs: join(ro, 'runs'),
          listen: null,
          once: true,
          rotateBytes: 1 << 24,
          channel: 0,
          linkTimeoutS: 60,
        },
        quietIo(),
      ),
    ).rejects.toMatchObject({ code: 'CV_RUN_FOLDER', exitCode: 1 });
  });
});
