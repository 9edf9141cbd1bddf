/**
 * Rotating sample logs under a fast stream, with and without compression of closed files.
 * The rows are RFC 4180 CSV (docs/run-folder.md); compressed files are read back with node:zlib
 * (gzip, RFC 1952) here in the test, independently of the product's replay reader.
 */
import { existsSync, mkdirSync, mkdtempSync, readdirSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import type { CompressOutcome } from '../../src/sinks/compress.js';
import { LogFile } from '../../src/sinks/log-file.js';
import { formatSampleRow, SAMPLE_COLUMNS, SAMPLE_HEADER } from '../../src/sinks/sample-row.js';
import { readRotated } from './helpers.js';

// A memory file system where there is one: ~7000 files each fsynced twice would measure the
// disk, not the ordering this test is about.
const root = mkdtempSync(join(existsSync('/dev/shm') ? '/dev/shm' : tmpdir(), 'cv-rotation-'));
afterAll(() => rmSync(root, { recursive: true, force: true }));

const ROWS = 100_000;
const LIMIT = 2048;

/** Row n of a synthetic stream: every field is derived from n, so any loss, doubling or swap shows. */
function row(n: number): string {
  return formatSampleRow({
    hostS: n / 10,
    wallMs: Date.UTC(2026, 0, 1) + n * 100,
    channel: 0,
    seq: n % 65536,
    tickMs: (n * 100) % 2 ** 32,
    vRaw: 2000 + (n % 97),
    iRaw: 1000 + (n % 89),
    tRaw: 2048,
    flags: 1,
    volts: 3.7 - n * 1e-6,
    amps: 1.33,
    celsius: 25,
    chargeAh: n * 3.7e-5,
    energyWh: n * 1.4e-4,
    state: 'discharging',
    calibrationId: 'none',
  });
}

/** A small deterministic generator for burst sizes (mulberry32). */
function bursts(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

async function stream(
  dir: string,
  compressClosed: boolean,
): Promise<{ outcomes: CompressOutcome[]; ms: number }> {
  const outcomes: CompressOutcome[] = [];
  const log = new LogFile({
    dir,
    name: 'samples-',
    ext: '.csv',
    header: SAMPLE_HEADER,
    rotateBytes: LIMIT,
    compressClosed,
    onCompressed: (o) => outcomes.push(o),
  });
  const rnd = bursts(compressClosed ? 7 : 11);
  const t0 = performance.now();
  let n = 0;
  let flushes: Promise<void>[] = [];
  while (n < ROWS) {
    // Bursts from 1 row to a few files' worth; flushes are not always awaited, so several queue up.
    const burst = Math.min(ROWS - n, 1 + Math.floor(rnd() * 60));
    for (let k = 0; k < burst; k++) log.append(row(n++));
    flushes.push(log.flush());
    if (rnd() < 0.3) {
      await Promise.all(flushes);
      flushes = [];
    }
  }
  await Promise.all(flushes);
  await log.close();
  return { outcomes, ms: performance.now() - t0 };
}

describe('rotation with a 2 KiB limit under 100 000 rows', () => {
  for (const compressClosed of [false, true]) {
    it(`rows written = rows read back, in order, none split or doubled (compression ${compressClosed ? 'on' : 'off'})`, async () => {
      const dir = join(root, compressClosed ? 'gz' : 'plain');
      mkdirSync(dir);
      const { outcomes, ms } = await stream(dir, compressClosed);

      const { rows, files } = readRotated(dir, 'samples-', SAMPLE_HEADER);
      expect(rows.length).toBe(ROWS);
      for (let n = 0; n < ROWS; n++) {
        if (rows[n] !== row(n)) expect.fail(`row ${n} read back as ${rows[n]}`);
      }
      // RFC 4180: every record has the header's number of fields.
      expect(rows.every((r) => r.split(',').length === SAMPLE_COLUMNS.length)).toBe(true);

      const names = readdirSync(dir);
      expect(names.some((n) => n.endsWith('.tmp'))).toBe(false);
      // Numbers run 1..N without a hole, each present once.
      expect(files.map((f) => Number(/(\d+)/.exec(f)![1]))).toEqual(files.map((_, i) => i + 1));
      expect(names.length).toBe(files.length);
      for (const f of files.filter((name) => !name.endsWith('.gz')))
        expect(statSync(join(dir, f)).size).toBeLessThanOrEqual(LIMIT);
      if (compressClosed) {
        // Every file but the last (still the current one at close) is compressed.
        expect(files.slice(0, -1).every((f) => f.endsWith('.csv.gz'))).toBe(true);
        expect(files.at(-1)!.endsWith('.csv')).toBe(true);
        expect(outcomes.length).toBe(files.length - 1);
        expect(outcomes.every((o) => o.error === null)).toBe(true);
      } else {
        expect(files.every((f) => f.endsWith('.csv'))).toBe(true);
        expect(outcomes).toEqual([]);
      }
      console.log(
        `rotation ${compressClosed ? 'with' : 'without'} compression: ${ROWS} rows, ${files.length} files, ${ms.toFixed(0)} ms`,
      );
    });
  }
});
