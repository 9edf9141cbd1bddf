import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { cycles, ModuleCache, shortName, tsFilesUnder } from './import-graph.js';

/*
 * Layers (common practice: an acyclic dependency graph between packages and between modules):
 * no folder of src/ depends on another that depends back on it, no file imports itself round
 * a loop, and the daemon (src/run) is driven from the command line only. Type-only imports
 * count too: a loop through a type still ties two folders together.
 */

const SRC = fileURLToPath(new URL('../../src/', import.meta.url));
const cache = new ModuleCache();
const files = tsFilesUnder(SRC);

/** Each file's imports of other files in src/, by short name. */
const fileGraph = new Map<string, Set<string>>(
  files.map((f) => [
    shortName(SRC, f),
    new Set(
      cache
        .get(f)
        .imports.flatMap((e) => (e.target?.startsWith(SRC) ? [shortName(SRC, e.target)] : [])),
    ),
  ]),
);

const folderOf = (rel: string): string => rel.split('/')[0] ?? rel;

function folderGraph(): Map<string, Set<string>> {
  const g = new Map<string, Set<string>>();
  for (const [file, targets] of fileGraph) {
    const from = folderOf(file);
    const set = g.get(from) ?? new Set<string>();
    for (const t of targets) if (folderOf(t) !== from) set.add(folderOf(t));
    g.set(from, set);
  }
  return g;
}

/** The imports that close a loop between folders, e.g. "a/x.ts -> b/y.ts", to say what to cut. */
function crossings(component: readonly string[]): string[] {
  const inside = new Set(component);
  const out: string[] = [];
  for (const [file, targets] of fileGraph) {
    for (const t of targets)
      if (folderOf(t) !== folderOf(file) && inside.has(folderOf(file)) && inside.has(folderOf(t)))
        out.push(`${file} -> ${t}`);
  }
  return out.sort();
}

describe('layers of src/', () => {
  it('the graph is read (the checks below have something to check)', () => {
    expect(fileGraph.size).toBeGreaterThan(50);
    expect(fileGraph.get('session/session.ts')?.has('session/integrator.ts')).toBe(true);
  });

  it('no cycle between folders', () => {
    const found = cycles(folderGraph()).map((c) => ({ folders: c, imports: crossings(c) }));
    expect(found).toEqual([]);
  });

  it('no cycle between files', () => {
    expect(cycles(fileGraph)).toEqual([]);
  });

  it('nothing but src/cli imports src/run', () => {
    const offenders = [...fileGraph].flatMap(([file, targets]) =>
      ['cli', 'run'].includes(folderOf(file))
        ? []
        : [...targets].filter((t) => folderOf(t) === 'run').map((t) => `${file} -> ${t}`),
    );
    expect(offenders).toEqual([]);
  });
});

describe('the cycle finder', () => {
  const graph = (edges: Record<string, string[]>): Map<string, Set<string>> =>
    new Map(Object.entries(edges).map(([k, v]) => [k, new Set(v)]));

  it('finds a loop of three and a self-loop, and nothing in a diamond (Tarjan, 1972)', () => {
    expect(cycles(graph({ a: ['b'], b: ['c'], c: ['a'], d: ['d'] }))).toEqual([
      ['a', 'b', 'c'],
      ['d'],
    ]);
    expect(cycles(graph({ a: ['b', 'c'], b: ['d'], c: ['d'], d: [] }))).toEqual([]);
  });
});
