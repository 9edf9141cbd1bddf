import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { gunzipSync } from 'node:zlib';
import { applyCalibration } from '../../src/calibration/calibration.js';
import { AnalogChain } from '../../src/chain/analog-chain.js';
import { parseRigProfile } from '../../src/chain/rig-profile-file.js';
import { encodeDataFrame } from '../../src/protocol/codec.js';
import { Pipeline } from '../../src/run/pipeline.js';
import { plausibilityFor } from '../../src/session/plausibility.js';
import { Session } from '../../src/session/session.js';

export const BENCH_RIG_PATH = fileURLToPath(
  new URL('../../config/rigs/bench-20mohm.yaml', import.meta.url),
);
export const BENCH_RIG_TEXT = readFileSync(BENCH_RIG_PATH, 'utf8');
export const BENCH_PROFILE = parseRigProfile(BENCH_RIG_TEXT, BENCH_RIG_PATH);
export const BENCH_CHAIN = new AnalogChain(BENCH_PROFILE);

/**
 * CRC-16/IBM-3740 bit by bit, straight from its parameters in the CRC catalogue (CRC RevEng):
 * width 16, poly 0x1021, init 0xFFFF, no reflection, xorout 0, check 0x29B1.
 */
export function referenceCrc16(text: string): number {
  let crc = 0xffff;
  for (const byte of Buffer.from(text, 'latin1')) {
    crc ^= byte << 8;
    for (let k = 0; k < 8; k++)
      crc = crc & 0x8000 ? ((crc << 1) ^ 0x1021) & 0xffff : (crc << 1) & 0xffff;
  }
  return crc;
}

/** A payload framed with a correct checksum, without the line end. */
export function framed(payload: string): string {
  return `${payload}|${referenceCrc16(payload).toString(16).toUpperCase().padStart(4, '0')}`;
}

/**
 * Raw counts of a healthy loaded Li-ion cell on the bench rig: about 3.7 V (2296 counts through
 * the 10k/10k divider on a 3.3 V, 12-bit ADC), 1.33 A (1000 counts), and the NTC at half scale,
 * where it equals the fixed 10 kΩ: 25 °C by the NTC's own rating.
 */
export const HEALTHY = { vRaw: 2296, iRaw: 1000, tRaw: 2048 } as const;

export interface FrameSpec {
  seq: number;
  tickMs: number;
  loadOn: boolean;
  channel?: number;
  vRaw?: number;
  iRaw?: number;
  tRaw?: number;
  flags?: number;
}

/** A data frame line (no `\n`), encoded by the product's own encoder as the simulated rig does. */
export function dataLine(f: FrameSpec): string {
  return encodeDataFrame({
    channel: f.channel ?? 0,
    seq: f.seq & 0xffff,
    tickMs: f.tickMs >>> 0,
    vRaw: f.vRaw ?? HEALTHY.vRaw,
    iRaw: f.iRaw ?? HEALTHY.iRaw,
    tRaw: f.tRaw ?? HEALTHY.tRaw,
    flags: f.flags ?? (f.loadOn ? 1 : 0),
  }).trimEnd();
}

/** A Session and Pipeline as the daemon builds them: the bench rig, no calibration, one Li-ion cell. */
export function benchPipeline(originMs = 0): { pipeline: Pipeline; session: Session } {
  const session = new Session({
    channel: 0,
    cutoffV: 3.0,
    floorV: 2.5,
    maxTemperatureC: 60,
    maxCurrentA: 10,
    // One Li-ion cell: 4.25 V the highest resting voltage (config/chemistries.yaml).
    plausibility: plausibilityFor({
      maxRestVPerCell: 4.25,
      cells: 1,
      ampsPerCount: BENCH_CHAIN.ampsPerCount,
    }),
    checkRest: () => null,
  });
  const pipeline = new Pipeline({
    channel: 0,
    adcBits: BENCH_PROFILE.adc.bits,
    converter: BENCH_CHAIN,
    corrector: applyCalibration(null),
    session,
    originMs,
  });
  return { pipeline, session };
}

export const FRAME_MS = 100;

/** Words that open the fix part of an error message. */
const FIX = /^(Set|Use|Give|Check|Add|Remove|Fix|Correct|Restore|Start|Undo|Make|Compare|Choose)\b/;

/** True when a message made as "what (where…). Fix." names `where` and its fix opens with a verb. */
export function namesPlaceAndFix(message: string, where: string): boolean {
  const at = message.indexOf(`(${where}`);
  if (at < 0) return false;
  // The place may quote odd key names that hold ")." themselves: any closing followed by a fix will do.
  for (
    let close = message.indexOf('). ', at);
    close >= 0;
    close = message.indexOf('). ', close + 1)
  ) {
    if (FIX.test(message.slice(close + 3))) return true;
  }
  return false;
}

/**
 * Feeds 12 resting frames (the precheck needs 5 frames over 1 s) and then loaded frames until
 * the session is discharging. Returns the next seq, tick and arrival time.
 */
export function warmUp(
  p: Pipeline,
  session: Session,
  startMs = 0,
): { seq: number; tick: number; at: number } {
  let seq = 0;
  let at = startMs;
  // At rest no current flows: the channel reads its offset, a couple of counts.
  for (; seq < 12; seq++, at += FRAME_MS)
    p.line(dataLine({ seq, tickMs: seq * FRAME_MS, loadOn: false, iRaw: 2 }), at, at);
  for (; session.state !== 'discharging'; seq++, at += FRAME_MS) {
    if (seq > 40) throw new Error(`the session did not reach discharging (${session.state})`);
    p.line(dataLine({ seq, tickMs: seq * FRAME_MS, loadOn: true }), at, at);
  }
  return { seq, tick: seq * FRAME_MS, at };
}

/** Everything a rejected line must leave as it was, as comparable text. */
export function snapshot(p: Pipeline, s: Session): string {
  const { accepted, lost, otherChannel } = p.counters;
  const i = s.integrator;
  return JSON.stringify({
    accepted,
    lost,
    otherChannel,
    chargeAh: i.chargeAh,
    energyWh: i.energyWh,
    onMs: i.onMs,
    bridgedAh: i.bridgedAh,
    nominalAh: p.nominalAh,
    state: s.state,
    loadOn: s.loadOn,
    result: s.result,
  });
}

/**
 * Reads rotated files `<prefix>NNNN.csv` and `.csv.gz` back in number order with node:zlib,
 * preferring the plain file when a number exists both ways. Checks the header at the top of
 * each file and returns the rows after it.
 */
export function readRotated(
  dir: string,
  prefix: string,
  header: string,
): { rows: string[]; files: string[] } {
  const re = new RegExp(`^${prefix}(\\d{4,})\\.csv(\\.gz)?$`);
  const byIndex = new Map<number, string>();
  for (const name of readdirSync(dir)) {
    const m = re.exec(name);
    if (!m) continue;
    const index = Number(m[1]);
    if (m[2] === undefined || !byIndex.has(index)) byIndex.set(index, name);
  }
  const files = [...byIndex.entries()].sort((a, b) => a[0] - b[0]).map(([, n]) => n);
  const rows: string[] = [];
  for (const name of files) {
    const raw = readFileSync(join(dir, name));
    const text = (name.endsWith('.gz') ? gunzipSync(raw) : raw).toString('utf8');
    if (!text.endsWith('\n')) throw new Error(`${name} does not end with a full row`);
    const lines = text.slice(0, -1).split('\n');
    if (lines[0] !== header) throw new Error(`${name} does not start with the header`);
    rows.push(...lines.slice(1));
  }
  return { rows, files };
}
