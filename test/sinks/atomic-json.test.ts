import { mkdtemp, readdir, readFile, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { writeJsonAtomic } from '../../src/sinks/atomic-json.js';

let dir: string;
beforeEach(async () => {
  dir = await mkdtemp(join(tmpdir(), 'cellvigil-json-'));
});
afterEach(async () => {
  await rm(dir, { recursive: true, force: true });
});

describe('writeJsonAtomic (POSIX rename(2) replaces the target atomically)', () => {
  it('writes, then replaces, a JSON file', async () => {
    const path = join(dir, 'checkpoint.json');
    await writeJsonAtomic(path, { chargeAh: 1 });
    expect(JSON.parse(await readFile(path, 'utf8'))).toEqual({ chargeAh: 1 });
    await writeJsonAtomic(path, { chargeAh: 2 });
    expect(JSON.parse(await readFile(path, 'utf8'))).toEqual({ chargeAh: 2 });
    expect(await readdir(dir)).toEqual(['checkpoint.json']); // no temporary file left behind
  });

  it('a reader polling during rewrites only ever sees the old or the new whole file', async () => {
    const path = join(dir, 'checkpoint.json');
    const big = (n: number): { n: number; pad: string } => ({ n, pad: 'z'.repeat(50_000 + n) });
    await writeJsonAtomic(path, big(0));
    let done = false;
    const seen = new Set<number>();
    const reader = (async () => {
      while (!done) {
        const v = JSON.parse(await readFile(path, 'utf8')) as { n: number; pad: string };
        expect(v.pad).toHaveLength(50_000 + v.n);
        seen.add(v.n);
      }
    })();
    for (let n = 1; n <= 30; n++) await writeJsonAtomic(path, big(n));
    done = true;
    await reader;
    expect(JSON.parse(await readFile(path, 'utf8')).n).toBe(30);
    expect(seen.size).toBeGreaterThan(1);
  });

  it('overlapping writes to one file each land whole: the result is one of them, and none fails', async () => {
    const path = join(dir, 'checkpoint.json');
    const values = Array.from({ length: 8 }, (_, n) => ({ n, pad: 'q'.repeat(1000 * (8 - n)) }));
    await Promise.all(values.map((v) => writeJsonAtomic(path, v)));
    const v = JSON.parse(await readFile(path, 'utf8')) as { n: number; pad: string };
    expect(values[v.n]).toEqual(v);
    expect(await readdir(dir)).toEqual(['checkpoint.json']);
  });
});
