import { PassThrough } from 'node:stream';

/** The daemon's stdout and stderr for a test: kept as one text, never printed. */
export function quietIo(): { out: PassThrough; err: PassThrough; text: () => string } {
  const out = new PassThrough();
  const err = new PassThrough();
  let text = '';
  out.on('data', (d: Buffer) => (text += d.toString()));
  err.on('data', (d: Buffer) => (text += d.toString()));
  return { out, err, text: () => text };
}
