import { appendFileSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import {
  appendSegment,
  readSegments,
  segmentAt,
  segmentsPath,
  type SegmentLine,
} from '../../src/record/segments.js';

const dirs: string[] = [];
afterEach(() => dirs.splice(0).forEach((d) => rmSync(d, { recursive: true, force: true })));
function folder(): string {
  const d = mkdtempSync(join(tmpdir(), 'cv-seg-'));
  dirs.push(d);
  return d;
}

function seg(index: number, started: number, ended: number): SegmentLine {
  return {
    index,
    kind: index % 2 ? 'rest' : 'discharge',
    purpose: 'program',
    step: `steps[${index}]`,
    cycle: null,
    started_ms: started,
    ended_ms: ended,
    end_reason: index % 2 ? 'rest_time' : 'cutoff',
    setpoint: { load: 'constant_current', current_A: 0.5, cutoff_V: 3 },
  };
}

// The line format is JSON Lines (jsonlines.org): one JSON object a line, each line ended by \n.
describe('segments.jsonl', () => {
  it('reads back what was appended, one JSON object a line', async () => {
    const d = folder();
    appendSegment(d, seg(0, 0, 1000));
    appendSegment(d, seg(1, 1000, 2500));
    const text = readFileSync(segmentsPath(d), 'utf8');
    expect(text.split('\n')).toHaveLength(3);
    expect(await readSegments(d)).toEqual([seg(0, 0, 1000), seg(1, 1000, 2500)]);
  });

  it('is empty for a run folder without a program', async () => {
    expect(await readSegments(folder())).toEqual([]);
  });

  it('leaves out a last line cut short by a crash', async () => {
    const d = folder();
    appendSegment(d, seg(0, 0, 1000));
    appendFileSync(segmentsPath(d), '{"index":1,"kind":"re');
    expect(await readSegments(d)).toHaveLength(1);
  });

  it('names the line of a damaged or out-of-order record', async () => {
    const d = folder();
    const two = (a: SegmentLine, b: SegmentLine): string =>
      `${JSON.stringify(a)}\n${JSON.stringify(b)}\n`;
    writeFileSync(segmentsPath(d), two(seg(0, 0, 1000), seg(2, 1000, 2000)));
    await expect(readSegments(d)).rejects.toThrow(/line 2: segment 2 where 1 was next/);
    writeFileSync(segmentsPath(d), `${JSON.stringify({ ...seg(0, 0, 1000), kind: 'boost' })}\n`);
    await expect(readSegments(d)).rejects.toThrow(/line 1/);
    writeFileSync(segmentsPath(d), two(seg(0, 0, 1000), seg(1, 900, 2000)));
    await expect(readSegments(d)).rejects.toThrow(/before segment 0 ended/);
  });

  it('puts a row in the last segment started at or before its time', () => {
    const s = [seg(0, 100, 200), seg(1, 200, 300), seg(2, 300, 400)];
    expect(segmentAt(s, 99)).toBe(-1);
    expect(segmentAt(s, 100)).toBe(0);
    expect(segmentAt(s, 199)).toBe(0);
    expect(segmentAt(s, 200)).toBe(1);
    expect(segmentAt(s, 10_000)).toBe(2);
  });
});
