import { execFileSync, spawn } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, afterEach, beforeEach, describe, expect, it } from 'vitest';
import { fileRunResult } from '../../src/registry/file-run.js';
import { rebuildRegistry } from '../../src/registry/rebuild.js';
import { Registry } from '../../src/registry/registry-db.js';
import { writeFixtureRun } from './run-fixtures.js';

let dir: string;
beforeEach(() => {
  dir = mkdtempSync(join(tmpdir(), 'cv-registry-fail-'));
});
afterEach(() => rmSync(dir, { recursive: true, force: true }));

/** Another process holding the registry's write lock until it is killed. */
async function holdLock(dbPath: string): Promise<() => void> {
  const child = spawn(
    process.execPath,
    [
      '-e',
      `const D = require('better-sqlite3'); const d = new D(${JSON.stringify(dbPath)}); d.exec('BEGIN EXCLUSIVE'); process.stdout.write('locked\\n'); setInterval(() => {}, 1000);`,
    ],
    { stdio: ['ignore', 'pipe', 'inherit'], cwd: process.cwd() },
  );
  await new Promise<void>((resolve, reject) => {
    child.stdout.on('data', () => resolve());
    child.on('exit', (code) => reject(new Error(`lock holder exited ${code}`)));
  });
  return () => child.kill('SIGKILL');
}

describe('a registry that cannot be written', () => {
  it('locked by another process: a clear error, never a throw, and the run is filed later', async () => {
    const dbPath = join(dir, 'registry.sqlite');
    Registry.open(dbPath).close();
    const runs = join(dir, 'runs');
    const folder = writeFixtureRun(runs, {
      cell_id: 'K1',
      started: '2026-05-01T08:00:00Z',
      capacity_Ah: 2.2,
    });
    const release = await holdLock(dbPath);
    let outcome;
    try {
      outcome = await fileRunResult(dbPath, folder, {
        attempts: 2,
        retryMs: 50,
        busyTimeoutMs: 50,
      });
    } finally {
      release();
    }
    expect(outcome.status).toBe('failed');
    if (outcome.status === 'failed') {
      expect(outcome.code).toBe('CV_REGISTRY_LOCKED');
      expect(outcome.message).toMatch(/locked by another process/);
      expect(outcome.message).toMatch(/cells rebuild/);
    }
    expect(JSON.parse(readFileSync(join(folder, 'result.json'), 'utf8')).cell_id).toBe('K1');
    const report = await rebuildRegistry(dbPath, [runs]);
    expect(report.filed).toBe(1);
  });

  it('a file that is not a registry: a clear error naming the file', () => {
    const bad = join(dir, 'not-a-db.sqlite');
    writeFileSync(
      bad,
      'this is a text file, not a database, and it goes on for a while '.repeat(20),
    );
    expect(() => Registry.open(bad)).toThrow(/CV_REGISTRY_OPEN|cannot be opened/);
    try {
      Registry.open(bad);
    } catch (e) {
      expect((e as { code: string }).code).toBe('CV_REGISTRY_OPEN');
      expect((e as Error).message).toContain(bad);
    }
  });
});

// A tiny tmpfs needs root; CI runs as root, so there the test must run, not skip.
const root = process.getuid?.() === 0;
const mounts: string[] = [];

describe.skipIf(!root && !process.env['CI'])('a full disk under the registry', () => {
  afterAll(() => {
    for (const m of mounts) execFileSync('umount', ['-l', m]);
  });

  it('gives a clear error, loses no run, and a rebuild files it once there is room', async () => {
    const mnt = mkdtempSync(join(tmpdir(), 'cv-mnt-'));
    execFileSync('mount', ['-t', 'tmpfs', '-o', 'size=256k', 'tmpfs', mnt]);
    mounts.push(mnt);
    const dbPath = join(mnt, 'registry.sqlite');
    Registry.open(dbPath).close();
    // Fill what is left of the disk.
    const filler = join(mnt, 'filler');
    try {
      execFileSync('dd', ['if=/dev/zero', `of=${filler}`, 'bs=4k', 'count=1000'], {
        stdio: 'ignore',
      });
    } catch {
      // dd stops at the end of the space: that is the point.
    }
    const runs = join(dir, 'runs');
    mkdirSync(runs);
    const folders = Array.from({ length: 40 }, (_, i) =>
      writeFixtureRun(runs, {
        cell_id: `F${i}`,
        started: new Date(Date.parse('2026-05-01T00:00:00Z') + i * 3.6e6).toISOString(),
        capacity_Ah: 2 + i / 100,
      }),
    );
    const outcomes = [];
    for (const f of folders) outcomes.push(await fileRunResult(dbPath, f, { attempts: 1 }));
    const failed = outcomes.filter((o) => o.status === 'failed');
    expect(failed.length).toBeGreaterThan(0);
    expect(failed[0]).toMatchObject({ code: 'CV_REGISTRY_WRITE' });
    expect((failed[0] as { message: string }).message).toMatch(/disk is full/);
    expect(JSON.parse(readFileSync(join(folders[0]!, 'result.json'), 'utf8')).cell_id).toBe('F0');
    rmSync(filler);
    const report = await rebuildRegistry(dbPath, [runs]);
    expect(report.filed).toBe(40);
    const reg = Registry.open(dbPath);
    expect(reg.counts().runs).toBe(40);
    reg.close();
  });
});
