/**
 * End-to-end plumbing: a pseudo-terminal pair made by socat, the simulated rig on one end
 * (`cellvigil sim`), the daemon (`cellvigil run --port`) on the other, both as real processes
 * of the built package.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, readdirSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { gunzipSync } from 'node:zlib';
import { fileURLToPath } from 'node:url';

export const CLI = fileURLToPath(new URL('../../dist/cli/main.js', import.meta.url));

export interface SimTruthFile {
  clock_ms: number;
  truth: {
    chargeAh: number;
    energyWh: number;
    loadOnS: number;
    loadOn: boolean;
    temperatureC: number;
    rigFault: boolean;
  };
  load_log: { atMs: number; on: boolean; cause: 'host' | 'watchdog' | 'stop' }[];
}

export interface PtyRig {
  dir: string;
  hostPath: string;
  truthPath: string;
  sim: ChildProcess;
  socat: ChildProcess;
  readTruth(): SimTruthFile;
  /** Kills socat: both ends of the link vanish, as when a USB adapter is pulled. */
  unplug(): Promise<void>;
  /** Starts socat again with the same paths. */
  plugIn(): Promise<void>;
  stop(): Promise<void>;
}

async function waitFor(cond: () => boolean, ms: number, what: string): Promise<void> {
  const until = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > until) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 25));
  }
}

function exited(p: ChildProcess): Promise<number | null> {
  return p.exitCode !== null || p.signalCode !== null
    ? Promise.resolve(p.exitCode)
    : new Promise((r) => p.once('exit', (code) => r(code)));
}

/** Starts socat and the simulated rig; resolves when the rig is writing frames. */
export async function startPtyRig(scenario: string, simArgs: string[] = []): Promise<PtyRig> {
  const dir = mkdtempSync(join(tmpdir(), 'cellvigil-e2e-'));
  const hostPath = join(dir, 'host');
  const rigPath = join(dir, 'rig');
  const truthPath = join(dir, 'truth.json');
  const startSocat = async (): Promise<ChildProcess> => {
    const p = spawn(
      'socat',
      [`pty,raw,echo=0,link=${hostPath}`, `pty,raw,echo=0,link=${rigPath}`],
      { stdio: 'ignore' },
    );
    await waitFor(
      () => existsSync(hostPath) && existsSync(rigPath),
      5000,
      'socat to create the pty pair',
    );
    return p;
  };
  let socat = await startSocat();
  const sim = spawn(
    process.execPath,
    [CLI, 'sim', scenario, '--port', rigPath, '--truth', truthPath, ...simArgs],
    { stdio: ['ignore', 'pipe', 'pipe'] },
  );
  let simErr = '';
  sim.stderr!.on('data', (d: Buffer) => (simErr += d.toString()));
  await waitFor(
    () => existsSync(truthPath) || sim.exitCode !== null,
    10_000,
    'the simulated rig to start',
  ).catch((e: Error) => {
    throw new Error(`${e.message}: ${simErr}`);
  });
  if (sim.exitCode !== null) throw new Error(`the simulated rig exited: ${simErr}`);
  return {
    dir,
    hostPath,
    truthPath,
    sim,
    get socat() {
      return socat;
    },
    unplug: async () => {
      socat.kill('SIGTERM');
      await exited(socat);
      await waitFor(() => !existsSync(hostPath), 5000, 'socat to remove its links');
    },
    plugIn: async () => {
      socat = await startSocat();
    },
    readTruth: () => JSON.parse(readFileSync(truthPath, 'utf8')) as SimTruthFile,
    stop: async () => {
      sim.kill('SIGTERM');
      await exited(sim);
      socat.kill('SIGTERM');
      await exited(socat);
    },
  };
}

export interface DaemonRun {
  child: ChildProcess;
  stdout(): string;
  stderr(): string;
  exit: Promise<number | null>;
}

export function startDaemon(args: string[]): DaemonRun {
  const child = spawn(process.execPath, [CLI, 'run', ...args], {
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  let out = '';
  let err = '';
  child.stdout!.on('data', (d: Buffer) => (out += d.toString()));
  child.stderr!.on('data', (d: Buffer) => (err += d.toString()));
  return { child, stdout: () => out, stderr: () => err, exit: exited(child) };
}

/** The one run folder under `runs`. */
export function onlyRunFolder(runs: string): string {
  const names = readdirSync(runs);
  if (names.length !== 1)
    throw new Error(`expected one run folder in ${runs}, found ${names.join(', ')}`);
  return join(runs, names[0]!);
}

export function readJson<T>(path: string): T {
  return JSON.parse(readFileSync(path, 'utf8')) as T;
}

/** Every row of a run's sample files, plain or compressed, in file order. */
export function sampleRows(folder: string): string[] {
  const files = readdirSync(folder)
    .filter((f) => /^samples-\d{4}\.csv(\.gz)?$/.test(f))
    .sort();
  return files.flatMap((f) => {
    const bytes = readFileSync(join(folder, f));
    const lines = (f.endsWith('.gz') ? gunzipSync(bytes) : bytes)
      .toString('utf8')
      .split('\n')
      .slice(1);
    return lines.filter((l) => l !== '');
  });
}
