/**
 * The daemon as a real process on an emulated rig's pseudo-terminal, as the end-to-end tests of
 * the reference firmware run it: the reference rig profile (or the CC variant's), a li-ion cell,
 * one run, no live feed, its run folder under the rig's own temporary folder.
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { onlyRunFolder, readJson, startDaemon, type DaemonRun } from '../e2e/pty-helpers.js';
import { RIG_PROFILE, type HarnessTruth } from './emulated-rig.js';

/** What the daemon needs of an emulated rig: its folder and its pseudo-terminal. */
export interface RigPort {
  dir: string;
  port: string;
}

export interface DaemonOptions {
  /** The rig profile. @default the reference rig's */
  profile?: string;
  /** The folder of runs, under the rig's folder: one per scenario when a rig serves several. */
  runsName?: string;
}

export interface DaemonOnRig {
  /** The arguments of `run`, to start a second daemon on the same run (a resume). */
  args: string[];
  runs: string;
  /** Starts a daemon with `args`. */
  start(): DaemonRun;
}

/** `extra` goes after the common arguments (a channel, a calibration, a program). */
export function daemonOnRig(
  rig: RigPort,
  extra: string[] = [],
  o: DaemonOptions = {},
): DaemonOnRig {
  const runs = join(rig.dir, o.runsName ?? 'runs');
  const args = [
    '--port',
    rig.port,
    '--rig',
    o.profile ?? RIG_PROFILE,
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

export interface FinishedRun<R, T = HarnessTruth> {
  exitCode: number | null;
  /** Date.now() when the daemon had exited. */
  exitedAtMs: number;
  /** The daemon's stdout and stderr, to show when an exit code is wrong. */
  output: string;
  truth: T;
  folder: string;
  result: R;
}

/**
 * Waits for the daemon to exit, lets the harness write its truth once more (it does every 100 ms
 * of emulated time), and reads the run's result.
 */
export async function finishedRun<R, T = HarnessTruth>(
  rig: { truth(): T },
  on: DaemonOnRig,
  d: DaemonRun,
): Promise<FinishedRun<R, T>> {
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
