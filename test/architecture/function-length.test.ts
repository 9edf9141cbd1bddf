import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { functionSpans, shortName, tsFilesUnder } from './import-graph.js';

/*
 * Small functions (common practice: a function that fits on a screen can be read whole). The
 * folders below keep every function, method and arrow function to MAX_LINES lines or fewer.
 */

const SRC = fileURLToPath(new URL('../../src/', import.meta.url));
const MAX_LINES = 80;
const FOLDERS = [
  'core',
  'protocol',
  'timebase',
  'chain',
  'calibration',
  'chemistry',
  'session',
  'schedule',
  'sim',
  'sources',
  'sinks',
  'assess',
  'results',
  'cli',
];

describe(`no function over ${MAX_LINES} lines`, () => {
  it(`in ${FOLDERS.join(', ')}`, () => {
    const long = FOLDERS.flatMap((folder) => tsFilesUnder(join(SRC, folder))).flatMap((file) =>
      functionSpans(file)
        .filter((f) => f.lines > MAX_LINES)
        .map((f) => `${shortName(SRC, file)}:${f.line} ${f.name} (${f.lines} lines)`),
    );
    expect(long).toEqual([]);
  });

  it('the measure counts a long function, an arrow function and a method', () => {
    const body = (n: number): string => '  x++;\n'.repeat(n);
    const text = [
      `export function long(): void {\n  let x = 0;\n${body(80)}}`,
      `export const arrow = (): void => {\n  let x = 0;\n${body(3)}};`,
      `class C {\n  m(): void {\n    let x = 0;\n  }\n}`,
    ].join('\n');
    expect(functionSpans('t.ts', text)).toEqual([
      { name: 'long', line: 1, lines: 83 },
      { name: 'arrow', line: 84, lines: 6 },
      { name: 'm', line: 91, lines: 3 },
    ]);
  });
});
