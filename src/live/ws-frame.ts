/**
 * One unmasked, unfragmented WebSocket text frame as a server sends it (RFC 6455 §5.2): FIN
 * and opcode 1, then the payload length in 7, 7+16 or 7+64 bits, then the payload. Built here
 * rather than by the WebSocket library's sender because a broadcast sends the same frame to
 * every viewer: framed once, it goes to each socket as one write of the same bytes.
 */
export function textFrame(payload: Buffer): Buffer {
  const n = payload.length;
  const head = n < 126 ? 2 : n < 65536 ? 4 : 10;
  const frame = Buffer.allocUnsafe(head + n);
  frame[0] = 0x81;
  if (n < 126) frame[1] = n;
  else if (n < 65536) {
    frame[1] = 126;
    frame.writeUInt16BE(n, 2);
  } else {
    frame[1] = 127;
    frame.writeBigUInt64BE(BigInt(n), 2);
  }
  payload.copy(frame, head);
  return frame;
}
