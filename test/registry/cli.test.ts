/** The `cells` and `pack` commands as a user runs them (the built CLI in a child process). */
import { execFile } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { promisify } from 'node:util';
import { afterAll, describe, expect, it } from 'vitest';
import { writeFixtureRun } from './run-fixtures.js';

const CLI = fileURLToPath(new URL('../../dist/cli/main.js', import.meta.url));
const dir = mkdtempSync(join(tmpdir(), 'cv-cells-cli-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

async function cv(...args: string[]): Promise<{ code: number; out: string; err: string }> {
  try {
    const { stdout, stderr } = await promisify(execFile)(process.execPath, [CLI, ...args], {
      cwd: dir,
    });
    return { code: 0, out: stdout, err: stderr };
  } catch (e) {
    const x = e as { code: number; stdout: string; stderr: string };
    return { code: x.code, out: x.stdout, err: x.stderr };
  }
}

describe('cells and pack commands', () => {
  it('import, rebuild, list, show with a page, pack with CSV; bad input exits 2', async () => {
    writeFileSync(
      join(dir, 'cells.csv'),
      'cell_id,chemistry,rated_mAh\n' +
        Array.from({ length: 8 }, (_, i) => `Q${i},li-ion,2500`).join('\n') +
        '\n',
    );
    writeFileSync(
      join(dir, 'bad.csv'),
      'cell_id,chemistry,rated_mAh\nZ1,li-ion,2500\nZ2,li-ion,lots\n',
    );
    expect((await cv('cells', 'import', 'cells.csv')).code).toBe(0);
    const bad = await cv('cells', 'import', 'bad.csv');
    expect(bad.code).toBe(2);
    expect(bad.err).toMatch(/CV_REGISTRY_CSV: .*bad\.csv, line 3, column 3 \(rated_mAh\)/);
    const dup = await cv('cells', 'add', 'Q1', '--chemistry', 'li-ion', '--rated', '2.5');
    expect(dup.code).toBe(2);
    expect(dup.err).toMatch(/CV_REGISTRY_DUPLICATE/);
    for (let i = 0; i < 8; i++)
      writeFixtureRun(join(dir, 'runs'), {
        cell_id: `Q${i}`,
        started: `2026-0${1 + (i % 3)}-1${i}T08:00:00.000Z`,
        capacity_Ah: 2.1 + i * 0.03,
        dc_resistance_ohm: 0.04,
      });
    expect((await cv('cells', 'rebuild')).out).toMatch(/8 run folder\(s\) read; 8 run\(s\) filed/);
    const list = await cv('cells', 'list', '--min-health', '91', '--sort', 'capacity', '--desc');
    expect(list.out.split('\n')[1]).toMatch(/^Q7 /);
    expect(list.out).toMatch(/\n2 cell\(s\)/); // 2.28 and 2.31 Ah are at least 91 % of 2.5 Ah
    const show = await cv('cells', 'show', 'Q3', '--page', 'q3.html');
    expect(show.code).toBe(0);
    expect(readFileSync(join(dir, 'q3.html'), 'utf8')).toMatch(/data-plot="capacity"/);
    expect((await cv('cells', 'show', 'nobody')).err).toMatch(/CV_REGISTRY_UNKNOWN_CELL/);
    const pack = await cv('pack', '-s', '2', '-p', '3', '--csv', 'pack.csv');
    expect(pack.code).toBe(0);
    expect(pack.out).toMatch(/pack 2S3P: expected capacity/);
    expect(readFileSync(join(dir, 'pack.csv'), 'utf8').trim().split('\n')).toHaveLength(7);
    expect((await cv('pack', '-s', '3', '-p', '3')).err).toMatch(/CV_PACK_TOO_FEW_CELLS/);
  }, 60_000);
});
