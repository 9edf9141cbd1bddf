import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, describe, expect, it } from 'vitest';
import { ModuleCache, reachable, shortName, tsFilesUnder } from './import-graph.js';

/*
 * The pure core (common practice: "functional core, imperative shell"): the folders below take
 * values and an injected time and return values and actions. Nothing they import, directly or
 * through another module, may touch files, sockets, timers or the process. Loaders (file
 * reading, YAML, schema validation) and real clocks sit beside them at the edge.
 */

const SRC = fileURLToPath(new URL('../../src/', import.meta.url));

const CORE_FOLDERS = [
  'core',
  'protocol',
  'timebase',
  'chain',
  'calibration',
  'chemistry',
  'session',
  'schedule',
  'measure',
  'program',
];

/** Edge files inside the core folders: they may do I/O, and no pure module may import them. */
const EDGE_FILES: Record<string, string> = {
  'core/host-clock.ts': "the clocks driven by the host's real timers",
  'core/paths.ts': 'package paths and the version read from package.json',
  'calibration/calibrate-run.ts': 'the calibrate command: opens the rig, writes the file',
};

/** A file named `*-file.ts` reads (or writes) one kind of file: it is at the edge. */
function isEdge(rel: string): boolean {
  return rel.endsWith('-file.ts') || rel in EDGE_FILES;
}

/** Modules that reach files, sockets, child processes, timers or native drivers. */
const IMPURE_MODULES = new Set([
  'fs',
  'fs/promises',
  'net',
  'tls',
  'http',
  'https',
  'http2',
  'dgram',
  'child_process',
  'worker_threads',
  'cluster',
  'timers',
  'timers/promises',
  'readline',
  'os',
  'process',
  'yaml',
  'ajv',
  'serialport',
  'ws',
  'chokidar',
  'better-sqlite3',
  'mqtt',
]);

function impureModule(specifier: string): boolean {
  const bare = specifier.replace(/^node:/, '');
  return IMPURE_MODULES.has(bare) || bare.startsWith('@serialport/') || bare.startsWith('ajv/');
}

/** What is impure about the modules reachable from `entries`, one line per finding. */
function impurities(root: string, entries: readonly string[]): string[] {
  const cache = new ModuleCache();
  const found: string[] = [];
  for (const [file, chain] of reachable(entries, cache)) {
    const facts = cache.get(file);
    const how = chain.map((f) => shortName(root, f)).join(' -> ');
    for (const edge of facts.imports) {
      if (edge.runtime && impureModule(edge.specifier))
        found.push(`${how} imports '${edge.specifier}' (line ${edge.line})`);
    }
    for (const g of facts.globals) found.push(`${how} uses ${g.name} (line ${g.line})`);
  }
  return found.sort();
}

function coreEntries(): string[] {
  return CORE_FOLDERS.flatMap((folder) => tsFilesUnder(join(SRC, folder))).filter(
    (file) => !isEdge(shortName(SRC, file)),
  );
}

describe('the core is pure as a module graph', () => {
  it('no core module reaches files, sockets, timers or the process', () => {
    expect(impurities(SRC, coreEntries())).toEqual([]);
  });

  it('the listed edge files exist (the list does not rot)', () => {
    const all = new Set(CORE_FOLDERS.flatMap((f) => tsFilesUnder(join(SRC, f))));
    for (const rel of Object.keys(EDGE_FILES)) expect(all.has(join(SRC, rel)), rel).toBe(true);
  });

  it('every core folder has pure modules to check', () => {
    const entries = coreEntries().map((f) => shortName(SRC, f).split('/')[0]);
    expect(new Set(entries)).toEqual(new Set(CORE_FOLDERS));
  });
});

describe('the purity check catches an impure module', () => {
  const dir = mkdtempSync(join(tmpdir(), 'cv-purity-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));
  const write = (name: string, text: string): string => {
    writeFileSync(join(dir, name), text);
    return join(dir, name);
  };
  write('reader.ts', "import { readFileSync } from 'node:fs';\nexport const r = readFileSync;\n");
  write('middle.ts', "export { r } from './reader.js';\n");
  write('timer.ts', 'export function later(f: () => void): void {\n  setTimeout(f, 1);\n}\n');
  write('env.ts', "export const home = process.env['HOME'];\n");
  write('types-only.ts', "import type { Stats } from 'node:fs';\nexport type S = Stats;\n");
  write('yaml-user.ts', "import { parse } from 'yaml';\nexport const p = parse;\n");
  write(
    'clean.ts',
    "import type { S } from './types-only.js';\nexport const clock = { setTimeout: 1 };\nexport type T = S;\n",
  );
  const check = (file: string): string[] => impurities(dir, [join(dir, file)]);

  it('through a re-export, two modules away', () => {
    write('entry.ts', "import { r } from './middle.js';\nexport const x = r;\n");
    expect(check('entry.ts')).toEqual([
      "entry.ts -> middle.ts -> reader.ts imports 'node:fs' (line 1)",
    ]);
  });

  it('a timer, the process, a YAML parser', () => {
    expect(check('timer.ts')).toEqual(['timer.ts uses setTimeout (line 2)']);
    expect(check('env.ts')).toEqual(['env.ts uses process (line 1)']);
    expect(check('yaml-user.ts')).toEqual(["yaml-user.ts imports 'yaml' (line 1)"]);
  });

  it('but not a type-only import (erased) or a property that shares a global name', () => {
    expect(check('clean.ts')).toEqual([]);
  });
});
