import { mkdtemp, open, readdir, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it, vi } from 'vitest';
import { LogFile } from '../../src/sinks/log-file.js';
import { SAMPLE_HEADER, sampleRowMaxBytes, SampleRowWriter } from '../../src/sinks/sample-row.js';

let dir: string;
beforeEach(async () => {
  dir = await mkdtemp(join(tmpdir(), 'cellvigil-log-'));
});
afterEach(async () => {
  await rm(dir, { recursive: true, force: true });
});

const HEADER = 'n,text';

/** Reads every rotated file in name order: per file its header and its rows. */
async function readBack(prefix = 'samples-'): Promise<{ name: string; lines: string[] }[]> {
  const names = (await readdir(dir)).filter((n) => n.startsWith(prefix)).sort();
  return Promise.all(
    names.map(async (name) => {
      const text = await readFile(join(dir, name), 'utf8');
      expect(text.endsWith('\n')).toBe(true); // no row cut off at the end of a file
      return { name, lines: text.slice(0, -1).split('\n') };
    }),
  );
}

function row(n: number): string {
  return `${n},${'x'.repeat(n % 37)}`;
}

describe('LogFile rotation (RFC 4180: a header row per file, whole rows)', () => {
  it('with a tiny size limit every row is read back once, in order, whole, and every file has the header', async () => {
    const log = new LogFile({ dir, name: 'samples-', header: HEADER, rotateBytes: 120 });
    const written: string[] = [];
    for (let n = 0; n < 500; n++) {
      written.push(row(n));
      log.append(row(n));
      if (n % 7 === 0) await log.flush(); // batches of varying size
    }
    await log.close();
    const files = await readBack();
    expect(files.length).toBeGreaterThan(10);
    expect(files.map((f) => f.name)).toEqual(
      files.map((_, k) => `samples-${String(k + 1).padStart(4, '0')}.csv`),
    );
    for (const f of files) {
      expect(f.lines[0]).toBe(HEADER);
      expect(f.lines.length).toBeGreaterThan(1); // no file holds only a header
      // within the limit unless a single row alone exceeds it
      const bytes = f.lines.reduce((s, l) => s + l.length + 1, 0);
      if (f.lines.length > 2) expect(bytes).toBeLessThanOrEqual(120);
    }
    expect(files.flatMap((f) => f.lines.slice(1))).toEqual(written);
    expect(log.files).toEqual(files.map((f) => join(dir, f.name)));
  });

  it.each([
    ['in the middle', ['1,a', `2,${'y'.repeat(100)}`, '3,b', '4,c']],
    ['first', [`1,${'y'.repeat(100)}`, '2,b', '3,c']],
    ['last', ['1,a', '2,b', `3,${'y'.repeat(100)}`]],
  ])(
    'a row longer than the limit (%s) gets a file of its own rather than being split',
    async (_where, rows) => {
      const log = new LogFile({ dir, name: 'samples-', header: HEADER, rotateBytes: 40 });
      rows.forEach((r) => log.append(r));
      await log.close();
      const files = await readBack();
      expect(files.flatMap((f) => f.lines.slice(1))).toEqual(rows);
      expect(files.some((f) => f.lines.length === 2 && f.lines[1]!.length > 100)).toBe(true);
      files.forEach((f) => expect(f.lines[0]).toBe(HEADER));
      files.forEach((f) => expect(f.lines.length).toBeGreaterThan(1)); // no file holds only a header
    },
  );

  it('sample rows with the sample header survive rotation unchanged', async () => {
    const log = new LogFile({ dir, name: 'samples-', header: SAMPLE_HEADER, rotateBytes: 1024 });
    const rows = Array.from({ length: 50 }, (_, k) => ({
      hostS: k * 0.1,
      wallMs: Date.UTC(2026, 0, 1) + k * 100,
      channel: 0,
      seq: k,
      tickMs: k * 100,
      vRaw: 2400,
      iRaw: 1500,
      tRaw: 2048,
      flags: 1,
      volts: 3.86,
      amps: 1.0,
      celsius: 25,
      chargeAh: k / 36000,
      energyWh: (3.86 * k) / 36000,
      state: 'discharging',
      calibrationId: 'none',
    }));
    const writer = new SampleRowWriter();
    rows.forEach((r) => log.appendWith(r, sampleRowMaxBytes(r), writer.write));
    await log.close();
    const files = await readBack();
    expect(files.length).toBeGreaterThan(2);
    files.forEach((f) => expect(f.lines[0]).toBe(SAMPLE_HEADER));
    // Each row as the column formats of docs/run-folder.md give it (toFixed, toISOString).
    const text = rows.map((r) =>
      [
        r.hostS.toFixed(3),
        new Date(r.wallMs).toISOString(),
        0,
        r.seq,
        r.tickMs,
        2400,
        1500,
        2048,
        '01',
        '3.86000',
        '1.00000',
        '25.00',
        r.chargeAh.toFixed(7),
        r.energyWh.toFixed(7),
        'discharging',
        'none',
      ].join(','),
    );
    expect(files.flatMap((f) => f.lines.slice(1))).toEqual(text);
    for (const f of files) for (const l of f.lines) expect(l.split(',')).toHaveLength(16);
  });

  it('resuming continues after the last file without a second header', async () => {
    const first = new LogFile({ dir, name: 'samples-', header: HEADER, rotateBytes: 60 });
    ['1,a', '2,b', '3,c', '4,d', '5,e', '6,f'].forEach((r) => first.append(r));
    await first.close();
    const before = await readBack();
    const resumed = new LogFile({
      dir,
      name: 'samples-',
      header: HEADER,
      rotateBytes: 60,
      firstIndex: before.length,
    });
    ['7,g', '8,h', '9,i'].forEach((r) => resumed.append(r));
    await resumed.close();
    const files = await readBack();
    expect(files.flatMap((f) => f.lines.slice(1))).toEqual([
      '1,a',
      '2,b',
      '3,c',
      '4,d',
      '5,e',
      '6,f',
      '7,g',
      '8,h',
      '9,i',
    ]);
    files.forEach((f) => expect(f.lines.filter((l) => l === HEADER)).toHaveLength(1));
  });

  it('without rotateBytes writes one named file', async () => {
    const log = new LogFile({ dir, name: 'events.jsonl' });
    log.append('{"a":1}');
    log.append('{"b":2}');
    await log.close();
    expect(await readFile(join(dir, 'events.jsonl'), 'utf8')).toBe('{"a":1}\n{"b":2}\n');
  });

  it('append refuses once the disk is far behind, instead of growing memory', () => {
    const log = new LogFile({ dir, name: 'samples-', rotateBytes: 1000, maxPendingBytes: 100 });
    for (let k = 0; k < 9; k++) log.append('x'.repeat(9));
    expect(() => log.append('x'.repeat(20))).toThrow(/waiting for the disk/);
  });

  it('a write failure is reported by flush and by every later append', async () => {
    const file = join(dir, 'blocked');
    await writeFile(file, '');
    const log = new LogFile({ dir: file, name: 'samples-', rotateBytes: 100 }); // a file where a folder should be
    log.append('1,a');
    await expect(log.flush()).rejects.toThrow();
    expect(() => log.append('2,b')).toThrow();
  });
});

describe('LogFile writes and syncs (a crash of the process against a power loss)', () => {
  it('flush(false) puts the rows in the file without fdatasync; flush() syncs once what is unsynced', async () => {
    const probe = await open(join(dir, 'probe'), 'w');
    const handleProto = Object.getPrototypeOf(probe) as { datasync: () => Promise<void> };
    await probe.close();
    const syncs = vi.spyOn(handleProto, 'datasync');
    try {
      const log = new LogFile({ dir, name: 'events.jsonl' });
      log.append('{"a":1}');
      await log.flush(false);
      // Another process (a reader, a resume after a crash) sees the row at once.
      expect(await readFile(join(dir, 'events.jsonl'), 'utf8')).toBe('{"a":1}\n');
      expect(syncs).not.toHaveBeenCalled();
      log.append('{"a":2}');
      await log.flush(false);
      await log.flush(); // nothing new queued, but two writes not yet on the disk
      expect(syncs).toHaveBeenCalledTimes(1);
      await log.flush(); // nothing written since: no second sync
      expect(syncs).toHaveBeenCalledTimes(1);
      await log.close();
      expect(await readFile(join(dir, 'events.jsonl'), 'utf8')).toBe('{"a":1}\n{"a":2}\n');
    } finally {
      syncs.mockRestore();
    }
  });
});
