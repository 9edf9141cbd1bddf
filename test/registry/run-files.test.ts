/**
 * A run filed as it ends (the built CLI in a child process): `run --cell` on the simulated rig
 * files its result into a fresh registry beside the runs folder, and `cells show` lists it with
 * the figures of the run folder's result.json. A registry held by another process (SQLite's
 * EXCLUSIVE lock, which keeps every other connection from writing: sqlite.org, "File Locking
 * And Concurrency") leaves the run whole: it ends as it would, says why it is not filed, and
 * `cells rebuild` files it afterwards.
 */
import { execFile } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { promisify } from 'node:util';
import Database from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { Registry } from '../../src/registry/registry-db.js';

const CLI = fileURLToPath(new URL('../../dist/cli/main.js', import.meta.url));
const dirs: string[] = [];
afterAll(() => dirs.forEach((d) => rmSync(d, { recursive: true, force: true })));

async function cv(cwd: string, ...args: string[]): Promise<{ code: number; out: string }> {
  try {
    const { stdout } = await promisify(execFile)(process.execPath, [CLI, ...args], {
      cwd,
      env: { ...process.env, CELLVIGIL_HOME: cwd },
    });
    return { code: 0, out: stdout };
  } catch (e) {
    const x = e as { code: number; stdout: string; stderr: string };
    return { code: x.code, out: x.stdout + x.stderr };
  }
}

function workDir(): string {
  const d = mkdtempSync(join(tmpdir(), 'cv-run-files-'));
  dirs.push(d);
  return d;
}

const RUN = ['run', '--sim', 'quick', '--speed', '100', '--once', '--no-live', '--runs', 'runs'];

function onlyResult(dir: string): { folder: string; result: { capacity_Ah: number } } {
  const folder = join(dir, 'runs', readdirSync(join(dir, 'runs'))[0]!);
  const result = JSON.parse(readFileSync(join(folder, 'result.json'), 'utf8')) as {
    capacity_Ah: number;
  };
  return { folder, result };
}

describe('run --cell files the run into the registry as it ends', () => {
  it('into a fresh registry beside the runs folder, shown by cells show', async () => {
    expect(existsSync(CLI), 'build first: npm run build').toBe(true);
    const dir = workDir();
    const run = await cv(dir, ...RUN, '--cell', 'Q-42');
    expect(run.code).toBe(0);
    const registry = join(dir, 'cellvigil-registry.sqlite');
    expect(run.out).toContain(`filed in the registry ${registry} under cell Q-42`);
    const { result } = onlyResult(dir);
    const show = await cv(dir, 'cells', 'show', 'Q-42');
    expect(show.code).toBe(0);
    const row = show.out.split('\n').find((l) => / cutoff /.test(l));
    // The registry's figure is the run folder's, as result.json states it (to 4 decimals here).
    expect(row).toContain(result.capacity_Ah.toFixed(4));
  }, 60_000);

  it('a run without a cell id is not filed, and says nothing about it', async () => {
    const dir = workDir();
    const run = await cv(dir, ...RUN);
    expect(run.code).toBe(0);
    expect(run.out).not.toMatch(/registry/);
    expect(existsSync(join(dir, 'cellvigil-registry.sqlite'))).toBe(false);
  }, 60_000);

  it('a locked registry loses nothing: the run ends, says why, and rebuild files it', async () => {
    const dir = workDir();
    const path = join(dir, 'elsewhere.sqlite');
    Registry.open(path).close();
    const holder = new Database(path);
    holder.exec('BEGIN EXCLUSIVE');
    let run: { code: number; out: string };
    try {
      run = await cv(dir, ...RUN, '--cell', 'L-9', '--registry', path);
    } finally {
      holder.exec('ROLLBACK');
      holder.close();
    }
    expect(run.code).toBe(0);
    expect(run.out).toMatch(/not filed in the registry \(CV_REGISTRY_LOCKED\)/);
    const { folder } = onlyResult(dir);
    expect(existsSync(join(folder, 'result.json'))).toBe(true);
    expect((await cv(dir, 'cells', 'rebuild', '--registry', path)).out).toMatch(/1 run\(s\) filed/);
    expect((await cv(dir, 'cells', 'show', 'L-9', '--registry', path)).out).toMatch(/ cutoff /);
  }, 60_000);
});
