import { createReadStream, readdirSync } from 'node:fs';
import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createInterface } from 'node:readline';
import { gzipSync } from 'node:zlib';
import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import {
  READ_CHUNK_BYTES,
  readLineBatches,
  readLines,
  type TextLine,
} from '../../src/replay/line-reader.js';

// Reference: node:readline with crlfDelay Infinity (Node's own line splitter, which the reader
// used to be built on): the same lines, numbered from 1, every one but the last terminated,
// the last one terminated when the file's last byte is a line feed.

let dir: string;
let files = 0;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'cv-lines-'));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

async function reference(path: string, bytes: Buffer): Promise<TextLine[]> {
  const out: TextLine[] = [];
  for await (const text of createInterface({ input: createReadStream(path), crlfDelay: Infinity }))
    out.push({ text, number: out.length + 1, terminated: true });
  const last = out.at(-1);
  if (last) last.terminated = bytes[bytes.length - 1] === 10;
  return out;
}

async function collect(path: string, gzip = false): Promise<TextLine[]> {
  const out: TextLine[] = [];
  // Long runs of the pieces below can join into a line past the reader's 1 MiB default limit
  // (its refusal is tested with the run folders); readline has none, so the comparison lifts it.
  for await (const l of readLines(path, { gzip, maxLineBytes: 64 * 1024 * 1024 })) out.push(l);
  return out;
}

// Pieces that stress the splitter: every kind of line end, multi-byte characters (split across
// read boundaries by the long runs), empty lines and a sample-like row.
const piece = fc.oneof(
  fc.constantFrom('\n', '\r\n', '\r', '\r\r\n', '\n\n', 'é', '€', '😀', ',', '"', 'x'),
  fc.string({ maxLength: 30 }),
  fc.integer({ min: 1, max: READ_CHUNK_BYTES + 6000 }).map((n) => 'y'.repeat(n)),
  fc.constant(
    '12.345,2026-11-14T07:30:00.050Z,0,1,50,2450,80,2100,01,4.02000,0.12000,24.50,0.0000017,0.0000068,discharging,none',
  ),
);

describe('line reader', () => {
  it('splits every file into the same lines as node:readline, plain or compressed', async () => {
    await fc.assert(
      fc.asyncProperty(fc.array(piece, { maxLength: 40 }), fc.boolean(), async (pieces, gzip) => {
        const bytes = Buffer.from(pieces.join(''), 'utf8');
        const plain = join(dir, `f${++files}.txt`);
        await writeFile(plain, bytes);
        const want = await reference(plain, bytes);
        let got: TextLine[];
        if (gzip) {
          const gz = `${plain}.gz`;
          await writeFile(gz, gzipSync(bytes));
          got = await collect(gz, true);
        } else {
          got = await collect(plain);
        }
        expect(got).toEqual(want);
      }),
      { numRuns: 150 },
    );
  }, 60_000);

  it('a \\r\\n split between two reads is one line end, as readline has it, ASCII or not', async () => {
    for (const at of [READ_CHUNK_BYTES - 2, READ_CHUNK_BYTES - 1, READ_CHUNK_BYTES]) {
      for (const end of ['\r\n', '\r', '\n', '\r\né', 'é\r\n', '\ré\n']) {
        // With an é after the boundary the rest of the file is not ASCII and is read as text.
        const bytes = Buffer.from(`${'y'.repeat(at)}${end}z\r\n\r`, 'utf8');
        const path = join(dir, `edge-${at}-${encodeURIComponent(end)}.txt`);
        await writeFile(path, bytes);
        expect(await collect(path)).toEqual(await reference(path, bytes));
      }
    }
  });

  it('a reader stopped early closes its file, plain or compressed', async () => {
    // Linux lists a process's open files in /proc/self/fd.
    const openFiles = (): number => readdirSync('/proc/self/fd').length;
    const text = Array.from({ length: 40_000 }, (_, i) => `row ${i},${'z'.repeat(i % 31)}`).join(
      '\n',
    );
    const plain = join(dir, 'early.txt');
    await writeFile(plain, text);
    await writeFile(`${plain}.gz`, gzipSync(text));
    const before = openFiles();
    for (let k = 0; k < 40; k++) {
      for await (const batch of readLineBatches(k % 2 === 0 ? plain : `${plain}.gz`, {
        gzip: k % 2 === 1,
      })) {
        expect(batch.length).toBeGreaterThan(0);
        break;
      }
    }
    expect(openFiles()).toBeLessThanOrEqual(before + 1);
  });

  it('gives the same lines in batches as one by one, and counts every byte once', async () => {
    const path = join(dir, 'batches.txt');
    const text = Array.from({ length: 20_000 }, (_, i) => `row ${i},${'z'.repeat(i % 97)}`).join(
      '\n',
    );
    await writeFile(path, text);
    let bytes = 0;
    const batched: TextLine[] = [];
    let batches = 0;
    for await (const b of readLineBatches(path, { onBytes: (n) => (bytes += n) })) {
      batches++;
      batched.push(...b);
    }
    expect(batched).toEqual(await collect(path));
    expect(batches).toBeGreaterThan(5);
    expect(bytes).toBe(Buffer.byteLength(text));
    expect(batched.at(-1)).toMatchObject({ number: 20_000, terminated: false });
  });
});
