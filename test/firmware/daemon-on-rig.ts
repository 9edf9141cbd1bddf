/**
 * The daemon as a real process on an emulated rig's pseudo-terminal, as the end-to-end tests of
 * the reference firmware run it: the reference rig profile, a li-ion cell, one run, no live
 * feed, its run folder under the rig's own temporary folder.
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { onlyRunFolder, readJson, startDaemon, type DaemonRun } from '../e2e/pty-helpers.js';
import { RIG_PROFILE, type EmulatedRig, type HarnessTruth } from './emulated-rig.js';

export interface DaemonOnRig {
  /** The arguments of `run`, to start a second daemon on the same run (a resume). */
  args: string[];
  runs: string;
  /** Starts a daemon with `args`. */
  start(): DaemonRun;
}

/** `extra` goes after the common arguments (a channel, a calibration). */
export function daemonOnRig(rig: EmulatedRig, extra: string[] = []): DaemonOnRig {
  const runs = join(rig.dir, 'runs');
  const args = [
    '--port',
    rig.port,
    '--rig',
    RIG_PROFILE,
    ...extra,
    '--chemistry',
    'li-ion',
    '--once',
    '--no-live',
    '--runs',
    runs,
  ];
  return { args, runs, start: () => startDaemon(args) };
}

export interface FinishedRun<R> {
  exitCode: number | null;
  /** Date.now() when the daemon had exited. */
  exitedAtMs: number;
  /** The daemon's stdout and stderr, to show when an exit code is wrong. */
  output: string;
  truth: HarnessTruth;
  folder: string;
  result: R;
}

/**
 * Waits for the daemon to exit, lets the harness write its truth once more (it does every 100 ms
 * of emulated time), and reads the run's result.
 */
export async function finishedRun<R>(
  rig: EmulatedRig,
  on: DaemonOnRig,
  d: DaemonRun,
): Promise<FinishedRun<R>> {
  const exitCode = await d.exit;
  const exitedAtMs = Date.now();
  const output = d.stdout() + d.stderr();
  await new Promise((r) => setTimeout(r, 300));
  const truth = rig.truth();
  const folder = onlyRunFolder(on.runs);
  const result = readJson<R>(join(folder, 'result.json'));
  return { exitCode, exitedAtMs, output, truth, folder, result };
}

/** The run's events, in order. */
export function runEvents<E>(folder: string): E[] {
  return readFileSync(join(folder, 'events.jsonl'), 'utf8')
    .trim()
    .split('\n')
    .map((l) => JSON.parse(l) as E);
}
