import { cp, mkdtemp, readdir, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { gzipSync } from 'node:zlib';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';
import { readLines } from '../../src/replay/line-reader.js';
import { openRunFolder, readRunEvents, readRunSamples } from '../../src/replay/run-folder.js';
import { SampleReader, splitCsvLine, type SampleRecord } from '../../src/replay/sample-csv.js';
import { recomputeRun } from '../../src/report/recompute.js';
import { reportRuns } from '../../src/report/report-runs.js';
import { formatSampleRow, SAMPLE_HEADER } from '../../src/sinks/sample-row.js';
import { demoScenario, simulateRun, type SimRun } from '../report/sim-run.js';

let root: string;
let run: SimRun;
let copies = 0;

beforeAll(async () => {
  root = await mkdtemp(join(tmpdir(), 'cv-replay-'));
  // About 150 rows a file: the run spreads over a dozen rotated files.
  run = await simulateRun({
    dir: join(root, 'run'),
    scenario: demoScenario(),
    rotateBytes: 20_000,
  });
}, 60_000);

afterAll(async () => {
  await rm(root, { recursive: true, force: true });
});

async function copy(): Promise<string> {
  const dir = join(root, `copy-${++copies}`);
  await cp(run.folder, dir, { recursive: true });
  return dir;
}

async function sampleFiles(dir: string): Promise<string[]> {
  return (await readdir(dir)).filter((n) => n.startsWith('samples-')).sort();
}

async function all(dir: string): Promise<SampleRecord[]> {
  const out: SampleRecord[] = [];
  for await (const s of readRunSamples(await openRunFolder(dir))) out.push(s);
  return out;
}

async function failure(p: Promise<unknown>): Promise<CellvigilError> {
  try {
    await p;
  } catch (e) {
    expect(e).toBeInstanceOf(CellvigilError);
    return e as CellvigilError;
  }
  throw new Error('expected a failure');
}

describe('sample rows', () => {
  it('splits quoted fields as RFC 4180 section 2 shows: "aaa","b""bb","ccc"', () => {
    expect(splitCsvLine('"aaa","b""bb","ccc"')).toEqual(['aaa', 'b"bb', 'ccc']);
    expect(splitCsvLine('aaa,"b,bb",ccc')).toEqual(['aaa', 'b,bb', 'ccc']);
    expect(splitCsvLine('aaa,"bbb,ccc')).toBeNull();
  });

  it('reads back what the sample log writes, empty temperature as NaN', () => {
    const row = {
      hostS: 12.345,
      wallMs: Date.UTC(2026, 11, 2, 11, 0, 12, 345),
      channel: 3,
      seq: 65535,
      tickMs: 4294967295,
      vRaw: 2605,
      iRaw: 1081,
      tRaw: 4095,
      flags: 0x03,
      volts: 4.19751,
      amps: 1.43717,
      celsius: Number.NaN,
      chargeAh: 0.0000185,
      energyWh: 0.0000761,
      state: 'discharging',
      calibrationId: '0123456789abcdef',
    };
    const r = new SampleReader().parseLine(formatSampleRow(row));
    expect(r).toMatchObject({
      hostS: 12.345,
      channel: 3,
      seq: 65535,
      tickMs: 4294967295,
      vRaw: 2605,
      iRaw: 1081,
      tRaw: 4095,
      flags: 3,
      volts: 4.19751,
      amps: 1.43717,
      chargeAh: 0.0000185,
      state: 'discharging',
      calibrationId: '0123456789abcdef',
    });
    expect(r.celsius).toBeNaN();
  });
});

describe('a run folder', () => {
  it('rotated files are read in number order, every row once', async () => {
    const files = await sampleFiles(run.folder);
    expect(files.length).toBeGreaterThan(5);
    const rows = await all(run.folder);
    expect(rows.length).toBe(run.result.frames_accepted);
    for (let i = 1; i < rows.length; i++) {
      expect(rows[i]!.hostS).toBeGreaterThanOrEqual(rows[i - 1]!.hostS);
      expect(rows[i]!.seq).toBeGreaterThan(rows[i - 1]!.seq);
    }
  });

  it('gzip-compressed rotated files read back in order, a plain copy preferred when both exist', async () => {
    const dir = await copy();
    const files = await sampleFiles(dir);
    for (const name of files.slice(0, -1)) {
      await writeFile(join(dir, `${name}.gz`), gzipSync(await readFile(join(dir, name))));
      if (name !== files[0]) await rm(join(dir, name));
    }
    const opened = await openRunFolder(dir);
    expect(opened.sampleFiles.filter((f) => f.gzip).length).toBe(files.length - 2);
    expect(opened.sampleFiles[0]!.gzip).toBe(false);
    expect(opened.notes.join(' ')).toContain('samples-0001.csv exists both plain and compressed');
    expect(await all(dir)).toEqual(await all(run.folder));
    const plain = await recomputeRun(await openRunFolder(run.folder));
    const packed = await recomputeRun(opened);
    expect(packed.result.capacity_Ah).toBe(plain.result.capacity_Ah);
    expect(packed.result.energy_Wh).toBe(plain.result.energy_Wh);
  });

  it('reports progress in file bytes up to the total', async () => {
    const opened = await openRunFolder(run.folder);
    const total = opened.sampleFiles.reduce((t, f) => t + f.bytes, 0);
    let done = 0;
    for await (const _ of readRunSamples(opened, { onBytes: (n) => (done += n) }));
    expect(done).toBe(total);
  });

  it('an interrupted run: a cut last row is left out and reported; the recompute writes result.json', async () => {
    const dir = await copy();
    await rm(join(dir, 'result.json'));
    const files = await sampleFiles(dir);
    const last = join(dir, files.at(-1)!);
    const text = await readFile(last, 'utf8');
    // The process died in the middle of writing a row.
    const cut = text.slice(0, text.length - 40);
    await writeFile(last, cut);
    const events = (await readFile(join(dir, 'events.jsonl'), 'utf8'))
      .split('\n')
      .filter((l) => l !== '' && !l.includes('"run_ended"'));
    await writeFile(join(dir, 'events.jsonl'), `${events.join('\n')}\n{"host_s":99.1,"wall_t`);
    const cuts: string[] = [];
    const opened = await openRunFolder(dir);
    for await (const _ of readRunSamples(opened, {
      onCutLine: (c) => cuts.push(`${c.file}:${c.line}`),
    }));
    for await (const _ of readRunEvents(opened, {
      onCutLine: (c) => cuts.push(`${c.file}:${c.line}`),
    }));
    const lineCount = cut.split('\n').length;
    expect(cuts).toEqual([`${files.at(-1)}:${lineCount}`, `events.jsonl:${events.length + 1}`]);

    const out = await reportRuns({ folders: [dir], generatedAt: '2026-12-03T10:00:00Z' });
    expect(out.runs[0]!.resultPath).toBe(join(dir, 'result.json'));
    const written = JSON.parse(await readFile(join(dir, 'result.json'), 'utf8')) as {
      end_reason: string;
      capacity_Ah: number;
      recomputed: { cut_lines: number };
    };
    expect(written.end_reason).toBe('interrupted');
    expect(written.recomputed.cut_lines).toBe(2);
    expect(written.capacity_Ah).toBeLessThan(run.result.capacity_Ah);
    expect(written.capacity_Ah).toBeGreaterThan(run.result.capacity_Ah * 0.95);
    expect(out.runs[0]!.figures.notes.join(' ')).toContain(
      `${files.at(-1)} line ${lineCount} was cut off`,
    );
  });

  it('a damaged row inside the run is an error naming the file, the line and the column', async () => {
    const dir = await copy();
    const name = (await sampleFiles(dir))[1]!;
    const lines = (await readFile(join(dir, name), 'utf8')).split('\n');
    lines[57] = lines[57]!.replace(/,01,/, ',zz,');
    await writeFile(join(dir, name), lines.join('\n'));
    const e = await failure(all(dir));
    expect(e.code).toBe(ErrorCodes.RUN_DATA);
    expect(e.message).toContain(`${name} line 58`);
    expect(e.message).toContain('column flags is "zz"');
  });

  it('the rows before a damaged row come out before its error, each one a record of its own', async () => {
    const dir = await copy();
    const names = await sampleFiles(dir);
    const lines = (await readFile(join(dir, names[1]!), 'utf8')).split('\n');
    lines[57] = lines[57]!.replace(/,01,/, ',zz,');
    await writeFile(join(dir, names[1]!), lines.join('\n'));
    const before = (await readFile(join(dir, names[0]!), 'utf8'))
      .split('\n')
      .filter((l) => l !== '')
      .slice(1);
    const got: SampleRecord[] = [];
    const e = await failure(
      (async () => {
        for await (const s of readRunSamples(await openRunFolder(dir))) got.push(s);
      })(),
    );
    expect(e.message).toContain(`${names[1]} line 58`);
    // The first file's rows, then the second's up to the damaged line 58 (header on line 1).
    expect(got).toHaveLength(before.length + 56);
    expect(new Set(got).size).toBe(got.length);
    const reader = new SampleReader();
    expect(got[0]).toEqual(reader.parseLine(before[0]!));
    expect(got.at(-1)).toEqual(reader.parseLine(lines[56]!));
  });

  it('a wrong header is an error naming line 1', async () => {
    const dir = await copy();
    const name = (await sampleFiles(dir))[0]!;
    const text = await readFile(join(dir, name), 'utf8');
    await writeFile(
      join(dir, name),
      text.replace(SAMPLE_HEADER, SAMPLE_HEADER.replace('v_raw', 'volts_raw')),
    );
    const e = await failure(all(dir));
    expect(e.message).toContain(`${name} line 1`);
  });

  it('a missing rotated file is an error: the run cannot be recomputed without it', async () => {
    const dir = await copy();
    await rm(join(dir, 'samples-0002.csv'));
    const e = await failure(openRunFolder(dir));
    expect(e.code).toBe(ErrorCodes.RUN_DATA);
    expect(e.message).toContain('sample file number 2 is missing');
  });

  it('a damaged gzip file is an error naming it', async () => {
    const dir = await copy();
    const gz = gzipSync(await readFile(join(dir, 'samples-0002.csv')));
    await writeFile(join(dir, 'samples-0002.csv.gz'), gz.subarray(0, gz.length / 2));
    await rm(join(dir, 'samples-0002.csv'));
    const e = await failure(all(dir));
    expect(e.message).toContain('samples-0002.csv.gz');
    expect(e.message).toContain('unexpected end of file');
  });

  it('the manifest is checked: its keys, and the copies it holds by their own rules', async () => {
    const dir = await copy();
    const path = join(dir, 'manifest.json');
    const m = JSON.parse(await readFile(path, 'utf8')) as Record<string, unknown> & {
      rig: { profile: { adc: { bits: number } } };
    };
    await writeFile(path, JSON.stringify({ ...m, cells: 0 }));
    expect((await failure(openRunFolder(dir))).message).toContain('cells must be >= 1');
    m.rig.profile.adc.bits = 4;
    await writeFile(path, JSON.stringify(m));
    const e = await failure(openRunFolder(dir));
    expect(e.message).toContain("the manifest's rig.profile is not valid");
    expect(e.message).toContain('adc.bits');
  });

  it('a folder without a manifest is not a run folder', async () => {
    const e = await failure(openRunFolder(root));
    expect(e.code).toBe(ErrorCodes.RUN_FOLDER);
    expect(e.message).toContain('no readable manifest.json');
  });
});

describe('line reader', () => {
  it('refuses a line longer than the limit instead of growing without bound', async () => {
    const path = join(root, 'long.txt');
    await writeFile(path, `${'x'.repeat(5000)}\nshort\n`);
    const read = async (): Promise<void> => {
      for await (const _ of readLines(path, { maxLineBytes: 1000 }));
    };
    expect((await failure(read())).message).toContain('a line longer than 1000 bytes');
  });
});
