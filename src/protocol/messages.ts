/** Decoded rig-to-host messages of protocol v1 (docs/protocol.md). */
export interface DataFrame {
  kind: 'data';
  channel: number;
  seq: number;
  tickMs: number;
  vRaw: number;
  iRaw: number;
  tRaw: number;
  flags: number;
}

export interface HelloFrame {
  kind: 'hello';
  rigId: string;
  firmware: string;
  adcBits: number;
  channels: number;
}

export interface AckFrame {
  kind: 'ack';
  command: string;
  args: string[];
}

export interface RigErrorFrame {
  kind: 'rig-error';
  code: string;
  text: string;
}

export type RigMessage = DataFrame | HelloFrame | AckFrame | RigErrorFrame;

export const FLAG_LOAD_ON = 0x01;
export const FLAG_RIG_FAULT = 0x02;

/** Why a line was rejected; stable strings, logged in events.jsonl. */
export type RejectReason =
  | 'overlong'
  | 'not_text'
  | 'no_checksum'
  | 'bad_checksum'
  | 'unknown_type'
  | 'field_count'
  | 'not_numeric'
  | 'out_of_range';

export type DecodeResult =
  { ok: true; message: RigMessage } | { ok: false; reason: RejectReason; detail: string };

/** Host-to-rig commands. */
export type HostCommand =
  { command: 'LOAD'; channel: number; on: boolean } | { command: 'HELLO' } | { command: 'BEAT' };

/*
 * Protocol 1.1 (docs/protocol.md, "Version 1.1"): what a channel can do, its mode, and the
 * setpoint of a constant-current load. Kept apart from the v1 unions above so that a v1 host's
 * code never sees a 1.1 message or sends a 1.1 command.
 */

/** How a channel's load draws current: a switched resistor, or a regulated electronic load. */
export type LoadKind = 'switched' | 'constant_current' | 'constant_power';

/** A `K` line: one channel's capabilities, in the raw counts of its own frames. */
export interface CapabilityFrame {
  kind: 'capability';
  channel: number;
  load: LoadKind;
  /** Lowest and highest current setpoint, in counts of the channel's current input (0 for switched). */
  iMinRaw: number;
  iMaxRaw: number;
  /** Highest power setpoint in count units (v_raw × i_raw / 2^adc_bits); 0 when not offered. */
  pMaxRaw: number;
  /** A charger switched by the rig (its own termination); its current is reported while charging. */
  charger: boolean;
}

export type RigMessage11 = RigMessage | CapabilityFrame;

export type ChannelMode = 'rest' | 'discharge' | 'charge';

/** Mode letters on the wire. */
export const MODE_LETTER: Record<ChannelMode, 'R' | 'D' | 'C'> = {
  rest: 'R',
  discharge: 'D',
  charge: 'C',
};

/** Host-to-rig commands that only a 1.1 rig understands. */
export type HostCommand11 =
  | { command: 'MODE'; channel: number; mode: ChannelMode }
  | { command: 'ISET'; channel: number; raw: number }
  | { command: 'PSET'; channel: number; raw: number };

/* Data-frame flags of 1.1, in bits v1 reserved (a v1 rig sends them as zero). */
/** Bits 2–3: how the channel's current is set (see `FrameRegulation`). */
export const FLAG_MODE_MASK = 0x0c;
export const FLAG_MODE_SHIFT = 2;
/** Bit 4: the current in `i_raw` flows into the cell (charging). */
export const FLAG_INTO_CELL = 0x10;
/** Bit 5: the constant-current trim is at its bound: the setpoint is not being held. */
export const FLAG_TRIM_AT_BOUND = 0x20;
/** Bits 6–7 stay reserved in 1.1. */
export const FLAG_RESERVED_11 = 0xc0;
