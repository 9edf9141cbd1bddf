/**
 * segments.jsonl: one JSON object a line, one line per segment (step) of a program run, written
 * when the segment ends (docs/programs.md). The sample rows keep their columns: a row belongs to
 * the segment whose [started_ms, next segment's started_ms) holds its host time, so a run folder
 * without a program reads exactly as before.
 */
import { closeSync, fdatasyncSync, openSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import { Ajv } from 'ajv';
import { ErrorCodes, makeError } from '../core/errors.js';
import type { SegmentLine } from '../program/segment-figures.js';
import { SEGMENT_ENDS } from '../program/sequence-types.js';
import { readOptional, schemaProblems } from './json-file.js';

export const SEGMENTS_FILE = 'segments.jsonl';

export type { SegmentLine } from '../program/segment-figures.js';

const ms = { type: 'integer', minimum: 0 };

// Closed: a line with a key this version does not know is a different file, not a segment.
const validate = new Ajv({ allErrors: true, strict: true, allowUnionTypes: true }).compile({
  type: 'object',
  additionalProperties: false,
  required: [
    'index',
    'kind',
    'purpose',
    'step',
    'cycle',
    'started_ms',
    'ended_ms',
    'end_reason',
    'setpoint',
  ],
  properties: {
    index: { type: 'integer', minimum: 0 },
    kind: { enum: ['rest', 'discharge', 'charge'] },
    purpose: { enum: ['program', 'storage'] },
    step: { type: 'string', maxLength: 200 },
    cycle: { type: ['integer', 'null'], minimum: 1 },
    started_ms: ms,
    ended_ms: ms,
    end_reason: { enum: [...SEGMENT_ENDS, 'interrupted'] },
    setpoint: {
      type: 'object',
      additionalProperties: { type: ['number', 'string', 'null'] },
    },
  },
});

export function segmentsPath(folder: string): string {
  return join(folder, SEGMENTS_FILE);
}

/**
 * Appends one ended segment and syncs it: segments end seldom (once a step), and a segment the
 * file lost would merge its rows into the next one's on a recompute.
 */
export function appendSegment(folder: string, segment: SegmentLine): void {
  const path = segmentsPath(folder);
  let fd: number | null = null;
  try {
    fd = openSync(path, 'a');
    writeSync(fd, `${JSON.stringify(segment)}\n`);
    fdatasyncSync(fd);
  } catch (e) {
    throw makeError(
      ErrorCodes.RUN_FOLDER,
      `cannot write the segment record: ${(e as Error).message}`,
      path,
      'Check the free space and permissions of the runs folder.',
    );
  } finally {
    if (fd !== null) closeSync(fd);
  }
}

function badLine(path: string, line: number, what: string): Error {
  return makeError(
    ErrorCodes.RUN_DATA,
    `line ${line}: ${what}`,
    path,
    'Restore segments.jsonl as the run wrote it; without it the run reads as one discharge.',
  );
}

/**
 * The segments of a run folder in the order they ran, or [] when it has none (not a program
 * run). A last line cut short by a crash (no line end) is left out: its segment was never
 * complete on disk, and `report` records it as interrupted.
 */
export async function readSegments(folder: string): Promise<SegmentLine[]> {
  const path = segmentsPath(folder);
  const text = await readOptional(path);
  if (text === null) return [];
  const lines = text.split('\n');
  if (lines[lines.length - 1] !== '') lines.pop();
  const out: SegmentLine[] = [];
  lines.forEach((line, i) => {
    if (line === '') return;
    let data: unknown;
    try {
      data = JSON.parse(line);
    } catch (e) {
      throw badLine(path, i + 1, `not valid JSON: ${(e as Error).message}`);
    }
    if (!validate(data)) throw badLine(path, i + 1, schemaProblems(validate).join('; '));
    const seg = data as SegmentLine;
    if (seg.index !== out.length)
      throw badLine(path, i + 1, `segment ${seg.index} where ${out.length} was next`);
    if (seg.ended_ms < seg.started_ms)
      throw badLine(path, i + 1, `ends at ${seg.ended_ms} ms, before it started`);
    const prev = out[out.length - 1];
    if (prev && seg.started_ms < prev.ended_ms)
      throw badLine(
        path,
        i + 1,
        `starts at ${seg.started_ms} ms, before segment ${prev.index} ended`,
      );
    out.push(seg);
  });
  return out;
}

/**
 * The index into `segments` of the segment a row at host time `hostMs` belongs to: the last one
 * started at or before it; -1 before the first. Segments are sorted by start (readSegments checks).
 */
export function segmentAt(
  segments: readonly Pick<SegmentLine, 'started_ms'>[],
  hostMs: number,
): number {
  let lo = 0;
  let hi = segments.length - 1;
  let found = -1;
  while (lo <= hi) {
    const mid = (lo + hi) >> 1;
    if (segments[mid]!.started_ms <= hostMs) {
      found = mid;
      lo = mid + 1;
    } else hi = mid - 1;
  }
  return found;
}
