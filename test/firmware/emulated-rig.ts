/**
 * The emulated rig for end-to-end tests: the reference firmware (firmware/) running on simavr's
 * ATmega328P inside test/firmware/harness, on a pseudo-terminal of the harness's own, with a
 * modelled cell, load and analog front end behind the chip's pins. `npm test` builds both
 * first (its pretest step runs make in firmware/ and test/firmware/).
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = (p: string): string => fileURLToPath(new URL(`../../${p}`, import.meta.url));
export const FIRMWARE_ELF = root('firmware/build/cellvigil-rig.elf');
export const HARNESS = root('test/firmware/build/rig-harness');
export const RIG_PROFILE = root('config/rigs/cv328-reference.yaml');

export interface Segment {
  from_ms: number;
  /** The harness's real (monotonic) clock at the segment's start, ms from boot. */
  from_real_ms: number;
  to_ms: number;
  load: boolean;
  mean_A: number;
  mean_V: number;
  mean_C: number;
}

export interface ChannelTruth {
  load_on: boolean;
  soc: number;
  current_A: number;
  terminal_V: number;
  temperature_C: number;
  charge_Ah: number;
  energy_Wh: number;
  load_on_s: number;
  hot_at_ms: number;
  segments: Segment[];
}

export interface HarnessTruth {
  emulated_ms: number;
  real_ms: number;
  pace: { speed: number; max_lag_ms: number; mean_lag_ms: number };
  link: { bytes_in: number; bytes_out: number; bytes_dropped: number; last_host_byte_ms: number };
  hung_at_ms: number;
  /** Cycles from power-on until both load pins were driven outputs. */
  boot_pins_driven_after_cycles: number;
  resets: { at_ms: number; cause: string; pins_driven_after_cycles: number }[];
  channels: [ChannelTruth, ChannelTruth];
}

export interface EmulatedRig {
  dir: string;
  port: string;
  child: ChildProcess;
  truth(): HarnessTruth;
  /** A control line to the harness: `hang`, `ambient <°C>`. */
  control(line: string): void;
  stop(): Promise<void>;
}

export interface RigOptions {
  capacityMah?: number;
  soc?: number;
  loadOhm?: number;
  seed?: number;
  thermalTauS?: number;
  /** Keep the chip in reset until the host's first byte (so the boot lines reach it). */
  hold?: boolean;
}

export function requireBuilt(): void {
  for (const f of [FIRMWARE_ELF, HARNESS])
    if (!existsSync(f))
      throw new Error(
        `${f} is missing: build it with "make -C firmware && make -C test/firmware" (npm test does).`,
      );
}

export async function startEmulatedRig(o: RigOptions = {}): Promise<EmulatedRig> {
  requireBuilt();
  const dir = mkdtempSync(join(tmpdir(), 'cellvigil-fw-'));
  const port = join(dir, 'rig');
  const truthPath = join(dir, 'truth.json');
  const args = ['--elf', FIRMWARE_ELF, '--link', port, '--truth', truthPath];
  const num = (flag: string, v: number | undefined): string[] =>
    v === undefined ? [] : [flag, String(v)];
  args.push(
    ...num('--capacity-mah', o.capacityMah),
    ...num('--soc', o.soc),
    ...num('--load-ohm', o.loadOhm),
    ...num('--seed', o.seed),
    ...num('--thermal-tau', o.thermalTauS),
    ...(o.hold ? ['--hold'] : []),
  );
  const child = spawn(HARNESS, args, { stdio: ['pipe', 'pipe', 'pipe'] });
  let out = '';
  let err = '';
  child.stdout!.on('data', (d: Buffer) => (out += d.toString()));
  child.stderr!.on('data', (d: Buffer) => (err += d.toString()));
  const exited = new Promise<void>((r) => child.once('exit', () => r()));
  const until = Date.now() + 10_000;
  while (!out.includes('ready ')) {
    if (child.exitCode !== null || Date.now() > until)
      throw new Error(`the rig harness did not start: ${out} ${err}`);
    await new Promise((r) => setTimeout(r, 20));
  }
  return {
    dir,
    port,
    child,
    truth: () => JSON.parse(readFileSync(truthPath, 'utf8')) as HarnessTruth,
    control: (line) => {
      child.stdin!.write(`${line}\n`);
    },
    stop: async () => {
      if (child.exitCode !== null || child.signalCode !== null) return;
      child.stdin!.end();
      await exited;
    },
  };
}

/** Polls until `cond` holds; throws with `what` after `ms`. */
export async function waitUntil(cond: () => boolean, ms: number, what: string): Promise<void> {
  const until = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > until) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}
