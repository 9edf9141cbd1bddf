/**
 * Which channel of a rig a line from it is for, without decoding it: the channel field of a
 * data frame (`D,<ch>,…`) or of a LOAD acknowledgement (`A,LOAD,<ch>,…`). Everything else
 * (hello, rig errors, lines too damaged to tell) belongs to the rig. The channel's own
 * pipeline decodes and checks the line in full, so a damaged line that still names a channel
 * is counted as rejected by that channel, as it would be on a rig of one channel.
 */
export const RIG_LINE = -1;

const D = 0x44;
const A = 0x41;
const COMMA = 0x2c;
const ZERO = 0x30;
const NINE = 0x39;

/** The channel 0..15 a line is for, or RIG_LINE. */
export function lineChannel(line: string): number {
  let i: number;
  const first = line.charCodeAt(0);
  if (first === D && line.charCodeAt(1) === COMMA) i = 2;
  else if (first === A && line.startsWith('A,LOAD,')) i = 7;
  else return RIG_LINE;
  let ch = 0;
  let digits = 0;
  for (; digits < 3; i++, digits++) {
    const c = line.charCodeAt(i);
    if (c === COMMA) break;
    if (c < ZERO || c > NINE) return RIG_LINE;
    ch = ch * 10 + (c - ZERO);
  }
  if (digits === 0 || line.charCodeAt(i) !== COMMA || ch > 15) return RIG_LINE;
  return ch;
}
