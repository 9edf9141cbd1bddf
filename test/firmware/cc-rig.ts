/**
 * The CC variant of the reference firmware (firmware/build/cc/cellvigil-rig-cc.elf) on the
 * emulated chip, and a small protocol 1.1 host for the tests: it opens the harness's
 * pseudo-terminal, keeps every line it hears, decodes them with the 1.1 codec, learns the rig's
 * capabilities from the hello exchange and sends commands only through the guard.
 */
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { SerialPort } from 'serialport';
import {
  HelloExchange,
  encodeForRig,
  type RigCapabilities,
} from '../../src/protocol/capabilities.js';
import { encodeCommand, frameLine } from '../../src/protocol/codec.js';
import { decodeRigLine11 } from '../../src/protocol/codec11.js';
import type { DataFrame, HostCommand, HostCommand11 } from '../../src/protocol/messages.js';
import { HARNESS, waitUntil, type ChannelTruth, type HarnessTruth } from './emulated-rig.js';

export const CC_FIRMWARE_ELF = fileURLToPath(
  new URL('../../firmware/build/cc/cellvigil-rig-cc.elf', import.meta.url),
);
export const CC_RIG_PROFILE = fileURLToPath(
  new URL('../../config/rigs/cv328-cc.yaml', import.meta.url),
);
/** The program files of the end-to-end tests. */
export const programFixture = (name: string): string =>
  fileURLToPath(new URL(`../fixtures/programs/${name}`, import.meta.url));

/** What the harness adds to a channel's truth for the CC variant. */
export interface CcChannelTruth extends ChannelTruth {
  charger_on: boolean;
  charge_phase: 'off' | 'cc' | 'cv' | 'done';
  load_A: number;
  charger_A: number;
  charged_Ah: number;
  charge_on_s: number;
  both_on_ms: number;
  setpoint_rc_V: number;
  /** The soft internal short (0: none) and the charge it has drawn. */
  leak_ohm: number;
  leaked_Ah: number;
  segments: (ChannelTruth['segments'][number] & {
    mode: 'rest' | 'discharge' | 'charge';
    phase: 'off' | 'cc' | 'cv' | 'done';
  })[];
}

export type CcTruth = Omit<HarnessTruth, 'channels'> & {
  channels: [CcChannelTruth, CcChannelTruth];
  /** Cycles from power-on until both setpoint pins and both charger pins were driven outputs. */
  boot_cc_pins_driven_after_cycles: number;
};

export interface Heard {
  line: string;
  /** Emulated ms of the harness when the line was taken (from the latest truth; coarse). */
  atMs: number;
}

export interface CcRig {
  truth(): CcTruth;
  control(line: string): void;
  heard: Heard[];
  /** Frames of a channel decoded, in order. */
  frames(ch: number, from?: number): DataFrame[];
  caps: RigCapabilities | null;
  /** Sends through the capability guard (throws CV_RIG_INCAPABLE for what the rig lacks). */
  send(cmd: HostCommand | HostCommand11): void;
  /** Sends a payload framed as is, past the guard: for checking the rig's own refusals. */
  sendRaw(payload: string): void;
  /** Waits for a line matching `pattern` heard at or after index `from`; returns it. */
  awaitLine(from: number, pattern: RegExp, what: string, ms?: number): Promise<string>;
  /** Heartbeats every `everyMs` real ms until stopped. */
  beat(on: boolean, everyMs?: number): void;
  stop(): Promise<void>;
}

export interface CcRigOptions {
  speed?: number;
  capacityMah?: number;
  soc?: number;
  internalOhm?: number;
  loadOhm?: number;
  chargeMa?: number;
  chargeV?: number;
  termMa?: number;
  /** The cell's thermal time constant, s of emulated time. */
  thermalTauS?: number;
  /** The truth notes when the cell first reaches this temperature, °C. */
  hotMarkC?: number;
  seed?: number;
}

/** The harness with the CC firmware alone, its chip held in reset until the host's first byte. */
export interface CcHarness {
  dir: string;
  port: string;
  truth(): CcTruth;
  /** A control line to the harness: `hang`, `ambient <°C>`, `leak <ch> <ohm>`. */
  control(line: string): void;
  stop(): Promise<void>;
}

export async function startCcHarness(o: CcRigOptions = {}): Promise<CcHarness> {
  for (const f of [CC_FIRMWARE_ELF, HARNESS])
    if (!existsSync(f))
      throw new Error(
        `${f} is missing: build it with "make -C firmware && make -C test/firmware".`,
      );
  const dir = mkdtempSync(join(tmpdir(), 'cellvigil-cc-'));
  const port = join(dir, 'rig');
  const truthPath = join(dir, 'truth.json');
  const num = (flag: string, v: number | undefined): string[] =>
    v === undefined ? [] : [flag, String(v)];
  const args = [
    ...['--elf', CC_FIRMWARE_ELF, '--link', port, '--truth', truthPath, '--hold'],
    ...num('--speed', o.speed),
    ...num('--capacity-mah', o.capacityMah),
    ...num('--soc', o.soc),
    ...num('--internal-ohm', o.internalOhm),
    ...num('--load-ohm', o.loadOhm),
    ...num('--charge-ma', o.chargeMa),
    ...num('--charge-v', o.chargeV),
    ...num('--term-ma', o.termMa),
    ...num('--thermal-tau', o.thermalTauS),
    ...num('--hot-mark', o.hotMarkC),
    ...num('--seed', o.seed),
  ];
  const child = spawn(HARNESS, args, { stdio: ['pipe', 'pipe', 'pipe'] });
  let out = '';
  child.stdout.on('data', (d: Buffer) => (out += d.toString()));
  child.stderr.on('data', (d: Buffer) => (out += d.toString()));
  if (process.env.CC_DEBUG) child.stderr.pipe(process.stderr);
  const exited = new Promise<void>((r) => child.once('exit', () => r()));
  await waitUntil(() => out.includes('ready ') || child.exitCode !== null, 10_000, 'the harness');
  if (!out.includes('ready ')) throw new Error(`the rig harness did not start: ${out}`);
  return {
    dir,
    port,
    truth: () => JSON.parse(readFileSync(truthPath, 'utf8')) as CcTruth,
    control: (line) => child.stdin.write(`${line}\n`),
    stop: async () => {
      if (child.exitCode !== null || child.signalCode !== null) return;
      child.stdin.end();
      await exited;
    },
  };
}

export async function startCcRig(o: CcRigOptions = {}): Promise<CcRig> {
  const harness = await startCcHarness(o);
  const { port, truth } = harness;
  const serial = new SerialPort({ path: port, baudRate: 250000, autoOpen: false });
  await new Promise<void>((res, rej) => serial.open((e) => (e ? rej(e) : res())));
  const heard: Heard[] = [];
  const exchange = new HelloExchange();
  let lastTruthMs = 0;
  let rest = '';
  const rig: CcRig = {
    truth,
    heard,
    caps: null,
    control: harness.control,
    frames: (ch, from = 0) =>
      heard.slice(from).flatMap((h) => {
        const r = decodeRigLine11(h.line, 12);
        return r.ok && r.message.kind === 'data' && r.message.channel === ch ? [r.message] : [];
      }),
    send: (cmd) => {
      serial.write(rig.caps ? encodeForRig(rig.caps, cmd) : encodeCommand(cmd as HostCommand));
    },
    sendRaw: (payload) => serial.write(frameLine(payload)),
    awaitLine: async (from, pattern, what, ms = 5000) => {
      const find = (): Heard | undefined => heard.slice(from).find((h) => pattern.test(h.line));
      await waitUntil(() => find() !== undefined, ms, what);
      return find()!.line;
    },
    beat: (on, everyMs = 200) => {
      if (beater) clearInterval(beater);
      beater = on
        ? setInterval(() => serial.write(encodeCommand({ command: 'BEAT' })), everyMs)
        : null;
    },
    stop: async () => {
      rig.beat(false);
      if (serial.isOpen) await new Promise<void>((r) => serial.close(() => r()));
      await harness.stop();
    },
  };
  let beater: ReturnType<typeof setInterval> | null = null;
  serial.on('data', (d: Buffer) => {
    rest += d.toString('latin1');
    const parts = rest.split('\n');
    rest = parts.pop()!;
    try {
      lastTruthMs = truth().emulated_ms;
    } catch {
      // the truth file is replaced atomically; before the first one there is none
    }
    for (const line of parts) {
      heard.push({ line, atMs: lastTruthMs });
      const settled = exchange.feed(decodeRigLine11(line, 12));
      if (settled && !(settled instanceof Error)) rig.caps = settled;
    }
  });
  // The chip is held in reset until this first byte: its boot hello and K lines then reach us.
  serial.write(encodeCommand({ command: 'HELLO' }));
  await waitUntil(() => rig.caps !== null, 10_000, 'the hello exchange');
  return rig;
}

/** Mean and extremes of a series. */
export function spread(xs: number[]): { mean: number; min: number; max: number } {
  const mean = xs.reduce((a, b) => a + b, 0) / xs.length;
  return { mean, min: Math.min(...xs), max: Math.max(...xs) };
}
