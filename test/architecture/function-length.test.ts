import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { functionSpans, shortName, tsFilesUnder } from './import-graph.js';

/*
 * Small functions (common practice: a function that fits on a screen can be read whole). Every
 * folder of src/ keeps every function, method and arrow function to MAX_LINES lines or fewer.
 */

const SRC = fileURLToPath(new URL('../../src/', import.meta.url));
const MAX_LINES = 80;

/**
 * Named, temporary exceptions, each with the work that removes it. Nothing else may be long.
 */
const EXCEPTIONS: string[] = [];

describe(`no function over ${MAX_LINES} lines`, () => {
  const long = (): Array<{ key: string; shown: string }> =>
    tsFilesUnder(SRC).flatMap((file) =>
      functionSpans(file)
        .filter((f) => f.lines > MAX_LINES)
        .map((f) => ({
          key: `${shortName(SRC, file)} ${f.name}`,
          shown: `${shortName(SRC, file)}:${f.line} ${f.name} (${f.lines} lines)`,
        })),
    );

  it('in every folder of src/, but for the named exceptions, which are still long', () => {
    const found = long();
    expect(found.filter((f) => !EXCEPTIONS.includes(f.key)).map((f) => f.shown)).toEqual([]);
    // An exception that was split is taken off the list.
    expect(EXCEPTIONS.filter((e) => !found.some((f) => f.key === e))).toEqual([]);
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
