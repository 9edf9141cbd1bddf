/**
 * Compression of closed sample files: a crash at any step leaves at least one complete copy,
 * the next start settles what was left, and the file being written is never touched.
 * Compressed files are read back with node:zlib (gzip, RFC 1952) by the test itself.
 */
import {
  existsSync,
  mkdirSync,
  mkdtempSync,
  readdirSync,
  readFileSync,
  rmSync,
  writeFileSync,
} from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { gzipSync } from 'node:zlib';
import { afterAll, describe, expect, it } from 'vitest';
import { compressClosedFile, type CompressOutcome } from '../../src/sinks/compress.js';
import { LogFile, type LogFileOptions } from '../../src/sinks/log-file.js';
import { readRotated } from './helpers.js';

const root = mkdtempSync(join(tmpdir(), 'cv-compress-'));
afterAll(() => rmSync(root, { recursive: true, force: true }));
let dirCount = 0;
function freshDir(): string {
  const d = join(root, String(++dirCount));
  mkdirSync(d);
  return d;
}

const HEADER = 'n,text';
const row = (n: number): string => `${n},row-${n}`;
const rowsText = (from: number, to: number): string =>
  [HEADER, ...Array.from({ length: to - from }, (_, k) => row(from + k))].join('\n') + '\n';

function options(dir: string, more: Partial<LogFileOptions> = {}): LogFileOptions {
  return { dir, name: 'samples-', ext: '.csv', header: HEADER, rotateBytes: 64, ...more };
}

/** Resolves once `n` compressions have been reported. */
function counter(): {
  outcomes: CompressOutcome[];
  onCompressed: (o: CompressOutcome) => void;
  reach: (n: number) => Promise<void>;
} {
  const outcomes: CompressOutcome[] = [];
  const waiters: { n: number; resolve: () => void }[] = [];
  return {
    outcomes,
    onCompressed: (o) => {
      outcomes.push(o);
      for (const w of waiters.filter((x) => outcomes.length >= x.n)) w.resolve();
    },
    reach: (n) =>
      outcomes.length >= n
        ? Promise.resolve()
        : new Promise((resolve) => waiters.push({ n, resolve })),
  };
}

describe('compressing a closed file', () => {
  it('leaves exactly the .gz, whose content is the plain file byte for byte', async () => {
    const dir = freshDir();
    const file = join(dir, 'samples-0001.csv');
    writeFileSync(file, rowsText(0, 500));
    const o = await compressClosedFile(file);
    expect(o.error).toBeNull();
    expect(readdirSync(dir)).toEqual(['samples-0001.csv.gz']);
    expect(o.bytesIn).toBe(Buffer.byteLength(rowsText(0, 500)));
    expect(o.bytesOut).toBeLessThan(o.bytesIn);
    expect(readRotated(dir, 'samples-', HEADER).rows).toEqual(
      Array.from({ length: 500 }, (_, k) => row(k)),
    );
  });

  it('keeps the plain file and leaves no temporary file when compression fails', async () => {
    const dir = freshDir();
    const file = join(dir, 'samples-0001.csv');
    writeFileSync(file, rowsText(0, 10));
    // The temporary name is taken by a folder, so the copy cannot be created.
    mkdirSync(`${file}.gz.tmp`);
    const o = await compressClosedFile(file);
    expect(o.error).toBeInstanceOf(Error);
    expect(o.gz).toBeNull();
    expect(readFileSync(file, 'utf8')).toBe(rowsText(0, 10));
    expect(existsSync(`${file}.gz`)).toBe(false);
  });
});

describe('a crash at each step of a compression', () => {
  // What the folder holds when the process dies at each point of compressClosedFile.
  const full = gzipSync(rowsText(0, 40));
  const states: [string, Record<string, Buffer | string>][] = [
    ['before it starts', { 'samples-0001.csv': rowsText(0, 40) }],
    [
      'while the copy is written',
      {
        'samples-0001.csv': rowsText(0, 40),
        'samples-0001.csv.gz.tmp': full.subarray(0, full.length >> 1),
      },
    ],
    [
      'after the copy is synced, before the rename',
      { 'samples-0001.csv': rowsText(0, 40), 'samples-0001.csv.gz.tmp': full },
    ],
    [
      'after the rename, before the plain file is removed',
      { 'samples-0001.csv': rowsText(0, 40), 'samples-0001.csv.gz': full },
    ],
    ['after the plain file is removed', { 'samples-0001.csv.gz': full }],
  ];
  for (const [when, files] of states) {
    it(`${when}: every row is readable once, and the next start settles the folder`, async () => {
      const dir = freshDir();
      for (const [name, content] of Object.entries(files)) writeFileSync(join(dir, name), content);
      expect(readRotated(dir, 'samples-', HEADER).rows).toEqual(
        Array.from({ length: 40 }, (_, k) => row(k)),
      );

      // A resumed run continues with the next number.
      const c = counter();
      const log = new LogFile(
        options(dir, { firstIndex: 2, compressClosed: true, onCompressed: c.onCompressed }),
      );
      log.append(row(40));
      await log.close();
      expect(readdirSync(dir).sort()).toEqual(['samples-0001.csv.gz', 'samples-0002.csv']);
      expect(c.outcomes.every((o) => o.error === null)).toBe(true);
      expect(readRotated(dir, 'samples-', HEADER).rows).toEqual(
        Array.from({ length: 41 }, (_, k) => row(k)),
      );
    });
  }

  it('a damaged .gz beside its plain file is dropped and made again from the plain one', async () => {
    const dir = freshDir();
    writeFileSync(join(dir, 'samples-0001.csv'), rowsText(0, 40));
    writeFileSync(join(dir, 'samples-0001.csv.gz'), gzipSync(rowsText(0, 3)));
    const log = new LogFile(options(dir, { firstIndex: 2, compressClosed: true }));
    log.append(row(40));
    await log.close();
    expect(readdirSync(dir).sort()).toEqual(['samples-0001.csv.gz', 'samples-0002.csv']);
    expect(readRotated(dir, 'samples-', HEADER).rows).toEqual(
      Array.from({ length: 41 }, (_, k) => row(k)),
    );
  });

  it('resuming into a number that exists both ways appends to the plain file and drops the stale .gz', async () => {
    const dir = freshDir();
    writeFileSync(join(dir, 'samples-0001.csv'), rowsText(0, 1));
    writeFileSync(join(dir, 'samples-0001.csv.gz'), gzipSync(rowsText(0, 1)));
    const log = new LogFile(
      options(dir, { firstIndex: 1, rotateBytes: 4096, compressClosed: true }),
    );
    log.append(row(1));
    await log.close();
    expect(readdirSync(dir)).toEqual(['samples-0001.csv']);
    expect(readFileSync(join(dir, 'samples-0001.csv'), 'utf8')).toBe(rowsText(0, 2));
  });

  for (const compressClosed of [false, true]) {
    it(`a number taken by a compressed file is never reused for a new plain file (compression ${compressClosed ? 'on' : 'off'})`, async () => {
      const dir = freshDir();
      writeFileSync(join(dir, 'samples-0001.csv.gz'), gzipSync(rowsText(0, 5)));
      const log = new LogFile(options(dir, { firstIndex: 1, rotateBytes: 4096, compressClosed }));
      log.append(row(5));
      await log.close();
      expect(log.files.map((f) => f.slice(dir.length + 1))).toEqual(['samples-0002.csv']);
      expect(readRotated(dir, 'samples-', HEADER).rows).toEqual(
        Array.from({ length: 6 }, (_, k) => row(k)),
      );
    });
  }
});

describe('LogFile with compressClosed', () => {
  it('never compresses the file being written', async () => {
    const dir = freshDir();
    const c = counter();
    const log = new LogFile(options(dir, { compressClosed: true, onCompressed: c.onCompressed }));
    // 64-byte files after a 7-byte header: rows 0-6 fill the first, 7-12 the second, 13 starts the third.
    for (let n = 0; n < 14; n++) log.append(row(n));
    await log.flush();
    await c.reach(2);
    expect(readdirSync(dir).sort()).toEqual([
      'samples-0001.csv.gz',
      'samples-0002.csv.gz',
      'samples-0003.csv',
    ]);
    log.append(row(14));
    await log.flush();
    expect(existsSync(join(dir, 'samples-0003.csv.gz'))).toBe(false);
    await log.close();
    expect(readdirSync(dir).sort()).toEqual([
      'samples-0001.csv.gz',
      'samples-0002.csv.gz',
      'samples-0003.csv',
    ]);
    expect(readRotated(dir, 'samples-', HEADER).rows).toEqual(
      Array.from({ length: 15 }, (_, k) => row(k)),
    );
  });

  it('leaves the folder alone when the option is off', async () => {
    const dir = freshDir();
    writeFileSync(join(dir, 'samples-0001.csv'), rowsText(0, 3));
    writeFileSync(join(dir, 'samples-0001.csv.gz.tmp'), 'partial');
    const log = new LogFile(options(dir, { firstIndex: 2 }));
    for (let n = 3; n < 20; n++) log.append(row(n));
    await log.close();
    const names = readdirSync(dir).sort();
    expect(names.filter((n) => n.includes('.gz'))).toEqual(['samples-0001.csv.gz.tmp']);
    expect(readRotated(dir, 'samples-', HEADER).rows).toEqual(
      Array.from({ length: 20 }, (_, k) => row(k)),
    );
  });
});

describe('a size limit below one header and one row', () => {
  it('puts one row in each file instead of rotating forever', async () => {
    const dir = freshDir();
    const log = new LogFile(options(dir, { rotateBytes: 4 }));
    for (let n = 0; n < 5; n++) log.append(row(n));
    await log.close();
    expect(readdirSync(dir).length).toBe(5);
    expect(readRotated(dir, 'samples-', HEADER).rows).toEqual(
      Array.from({ length: 5 }, (_, k) => row(k)),
    );
  });
});
