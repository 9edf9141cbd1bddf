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
