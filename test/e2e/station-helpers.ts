/** End-to-end plumbing for stations: the `station` and `control` commands as real processes. */
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { CLI, type DaemonRun } from './pty-helpers.js';

/** A cellvigil folder of its own (tokens.json), so tests never touch the user's. */
export function isolatedEnv(): NodeJS.ProcessEnv {
  return { ...process.env, CELLVIGIL_HOME: mkdtempSync(join(tmpdir(), 'cellvigil-home-')) };
}

export function startStationDaemon(args: string[], env: NodeJS.ProcessEnv): DaemonRun {
  const child = spawn(process.execPath, [CLI, 'station', ...args], {
    stdio: ['ignore', 'pipe', 'pipe'],
    env,
  });
  let out = '';
  let err = '';
  child.stdout!.on('data', (d: Buffer) => (out += d.toString()));
  child.stderr!.on('data', (d: Buffer) => (err += d.toString()));
  const exit = new Promise<number | null>((r) => child.once('exit', (code) => r(code)));
  return { child, stdout: () => out, stderr: () => err, exit };
}

/** Runs one command of the CLI to its end. */
export function runCli(
  args: string[],
  env: NodeJS.ProcessEnv,
): Promise<{ code: number | null; output: string }> {
  const child = spawn(process.execPath, [CLI, ...args], { stdio: ['ignore', 'pipe', 'pipe'], env });
  let output = '';
  child.stdout.on('data', (d: Buffer) => (output += d.toString()));
  child.stderr.on('data', (d: Buffer) => (output += d.toString()));
  return new Promise((r) => child.once('exit', (code) => r({ code, output })));
}

export async function until(cond: () => boolean, ms: number, what: string): Promise<void> {
  const end = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > end) throw new Error(`timed out: ${what}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

export interface StationRunFolder {
  folder: string;
  manifest: { cell_id?: string | null; channel: number; [k: string]: unknown };
  result: {
    end_reason: string;
    capacity_Ah: number;
    cell_id?: string | null;
    [k: string]: unknown;
  } | null;
  events: Array<{ event: string; [k: string]: unknown }>;
}

/** Every run folder under `runs`, by the cell id in its manifest. */
export function runsByCell(runs: string): Map<string, StationRunFolder[]> {
  const out = new Map<string, StationRunFolder[]>();
  for (const name of readdirSync(runs).sort()) {
    const folder = join(runs, name);
    if (!existsSync(join(folder, 'manifest.json'))) continue;
    const manifest = JSON.parse(
      readFileSync(join(folder, 'manifest.json'), 'utf8'),
    ) as StationRunFolder['manifest'];
    const resultPath = join(folder, 'result.json');
    const result = existsSync(resultPath)
      ? (JSON.parse(readFileSync(resultPath, 'utf8')) as StationRunFolder['result'])
      : null;
    const events = readFileSync(join(folder, 'events.jsonl'), 'utf8')
      .trim()
      .split('\n')
      .filter(Boolean)
      .map((l) => JSON.parse(l) as { event: string });
    const key = String(manifest.cell_id ?? '');
    out.set(key, [...(out.get(key) ?? []), { folder, manifest, result, events }]);
  }
  return out;
}

/** The live page's address a station printed. */
export function liveUrl(stdout: string): string | null {
  return /^live: (http:\/\/\S+)$/m.exec(stdout)?.[1] ?? null;
}
